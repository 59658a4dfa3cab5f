package plot

import (
	"fmt"
	"image/color"
	"math"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"muarc/analysis"
	"muarc/record"
)

// maxWavePoints bounds the points drawn per template waveform; longer
// templates are drawn at every k-th lag (a display choice).
const maxWavePoints = 60

// MUAPGrid draws the templates of every unit of a decomposition as small
// panels, each laid out as the electrode grid: in every cell the channel's
// template (all cells of a panel on one scale, the unit's largest
// peak-to-peak filling 90 % of a cell's height) over a background whose
// shade is the channel's peak-to-peak amplitude relative to the unit's
// largest (the amplitude map). Channels marked unusable are drawn grey.
func MUAPGrid(title string, arr *record.Array, t *analysis.Templates) *Figure {
	m := &t.MUAPs
	n := m.Units
	grid := make([][]int, 0) // [row][col] -> channel index or -1
	rows, cols := arr.Rows, arr.Columns
	for _, c := range arr.Channels {
		rows, cols = max(rows, c.Row+1), max(cols, c.Column+1)
	}
	if rows <= 0 || cols <= 0 {
		rows, cols = 1, m.Channels
	}
	for r := 0; r < rows; r++ {
		grid = append(grid, make([]int, cols))
		for c := range grid[r] {
			grid[r][c] = -1
		}
	}
	onGrid := false
	for i, c := range arr.Channels {
		if c.Row >= 0 && c.Column >= 0 && c.Row < rows && c.Column < cols {
			grid[c.Row][c.Column] = i
			onGrid = true
		}
	}
	if !onGrid {
		for i := 0; i < m.Channels && i < cols; i++ {
			grid[0][i] = i
		}
	}
	pc := int(math.Ceil(math.Sqrt(float64(max(n, 1)) * 1.4)))
	pr := (max(n, 1) + pc - 1) / pc
	width := 10 * vg.Inch
	panelW := width / vg.Length(pc)
	titleH := vg.Points(14)
	cellW := (panelW - vg.Points(8)) / vg.Length(cols)
	cellH := cellW * 1.2
	panelH := titleH + cellH*vg.Length(rows) + vg.Points(8)
	headH := vg.Points(24)
	height := headH + panelH*vg.Length(pr)
	usable := func(ch int) bool { return ch >= len(arr.Channels) || arr.Channels[ch].Usable }
	step := (m.Lags + maxWavePoints - 1) / maxWavePoints
	step = max(step, 1)
	gap := vg.Points(0.6) // white line between cells

	draw1 := func(dc draw.Canvas) {
		hdr := text.Style{Color: color.Black, Font: font.From(gplot.DefaultFont, 12), Handler: gplot.DefaultTextHandler, XAlign: draw.XLeft, YAlign: draw.YTop}
		small := hdr
		small.Font = font.From(gplot.DefaultFont, 7.5)
		dc.FillText(hdr, vg.Point{X: dc.Min.X + vg.Points(6), Y: dc.Max.Y - vg.Points(5)},
			fmt.Sprintf("%s — MUAP templates, %.0f to %.0f ms, %d units; shade = peak-to-peak amplitude map", title,
				1000*float64(m.FirstLag)/arr.SamplingRateHz, 1000*float64(m.FirstLag+m.Lags-1)/arr.SamplingRateHz, n))
		for u := 0; u < n; u++ {
			px := dc.Min.X + panelW*vg.Length(u%pc)
			py := dc.Max.Y - headH - panelH*vg.Length(u/pc) // top of panel
			maxP := 0.0
			for _, v := range t.PeakToPeak[u] {
				if v > maxP {
					maxP = v
				}
			}
			label := fmt.Sprintf("unit %d: n=%d, max %.3g %s", unitID(t, u), t.Averaged[u], maxP, m.Unit)
			if t.Averaged[u] < 0 {
				label = fmt.Sprintf("unit %d: stored, max %.3g %s", unitID(t, u), maxP, m.Unit)
			}
			dc.FillText(small, vg.Point{X: px + vg.Points(4), Y: py - vg.Points(2)}, label)
			if !(maxP > 0) {
				continue
			}
			for r := 0; r < rows; r++ {
				for c := 0; c < cols; c++ {
					ch := grid[r][c]
					x0 := px + vg.Points(4) + cellW*vg.Length(c)
					ytop := py - titleH - cellH*vg.Length(r)
					if ch < 0 || ch >= m.Channels {
						continue
					}
					rel := t.PeakToPeak[u][ch] / maxP
					if math.IsNaN(rel) {
						rel = 0
					}
					shade := uint8(255 - 90*rel)
					dc.FillPolygon(color.RGBA{R: shade, G: shade, B: 255, A: 255}, []vg.Point{
						{X: x0 + gap, Y: ytop - cellH + gap}, {X: x0 + cellW - gap, Y: ytop - cellH + gap}, {X: x0 + cellW - gap, Y: ytop - gap}, {X: x0 + gap, Y: ytop - gap}})
					var path vg.Path
					mid := ytop - cellH/2
					for l := 0; l < m.Lags; l += step {
						v := float64(m.At(u, ch, l))
						if math.IsNaN(v) {
							continue
						}
						pt := vg.Point{X: x0 + cellW*(0.05+0.9*vg.Length(l)/vg.Length(max(m.Lags-1, 1))), Y: mid + cellH*0.9*vg.Length(v/maxP)}
						if l == 0 {
							path.Move(pt)
						} else {
							path.Line(pt)
						}
					}
					col := color.Color(color.Black)
					if !usable(ch) {
						col = color.Gray{Y: 160}
					}
					dc.SetLineStyle(draw.LineStyle{Color: col, Width: vg.Points(0.5)})
					dc.Stroke(path)
				}
			}
		}
	}
	return &Figure{Width: width, Height: height, draw: draw1}
}

// unitID returns the id of template row u (ids are carried beside the
// templates by the caller through Templates.IDs when set, else the row).
func unitID(t *analysis.Templates, u int) int64 {
	if u < len(t.IDs) {
		return t.IDs[u]
	}
	return int64(u)
}
