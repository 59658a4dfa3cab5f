package plot

import (
	"fmt"
	"image/color"
	"math"
	"strconv"

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
	titleH := vg.Points(16)
	cellW := (panelW - vg.Points(34)) / vg.Length(cols) // room for the amplitude bar
	cellH := cellW * 1.2
	panelH := titleH + cellH*vg.Length(rows) + vg.Points(8)
	headH := vg.Points(44)
	height := headH + panelH*vg.Length(pr)
	usable := func(ch int) bool { return ch >= len(arr.Channels) || arr.Channels[ch].Usable }
	step := (m.Lags + maxWavePoints - 1) / maxWavePoints
	step = max(step, 1)
	gap := vg.Points(0.6) // white line between cells

	draw1 := func(dc draw.Canvas) {
		hdr := text.Style{Color: color.Black, Font: font.From(gplot.DefaultFont, 12), Handler: gplot.DefaultTextHandler, XAlign: draw.XLeft, YAlign: draw.YTop}
		small := hdr
		small.Font = font.From(gplot.DefaultFont, 9)
		unit := displayUnit(m.Unit)
		winMs := 1000 * float64(m.Lags-1) / arr.SamplingRateHz
		dc.FillText(hdr, vg.Point{X: dc.Min.X + vg.Points(6), Y: dc.Max.Y - vg.Points(5)},
			fmt.Sprintf("%s — MUAP templates, %.0f to %.0f ms, %d units", title,
				1000*float64(m.FirstLag)/arr.SamplingRateHz, 1000*float64(m.FirstLag+m.Lags-1)/arr.SamplingRateHz, n))
		// Keys: the time bar (one cell's trace), the shade key, and the
		// amplitude bar beside every panel.
		ky := dc.Max.Y - vg.Points(30)
		kx := dc.Min.X + vg.Points(8)
		bar := draw.LineStyle{Color: color.Black, Width: vg.Points(1.2)}
		dc.StrokeLine2(bar, kx, ky, kx+cellW*0.9, ky)
		kx += cellW*0.9 + vg.Points(4)
		kx = keyText(dc, small, kx, ky, fmt.Sprintf("%.0f ms (one cell's trace)", winMs)) + vg.Points(28)
		kx = keyText(dc, small, kx, ky, "cell shade, the channel's peak-to-peak relative to the unit's largest:") + vg.Points(10)
		// Five swatches, each with its percentage right of it and a clear
		// gap before the next.
		for i := 0; i <= 4; i++ {
			sh := uint8(255 - 90*float64(i)/4)
			dc.FillPolygon(color.RGBA{R: sh, G: sh, B: 255, A: 255}, []vg.Point{{X: kx, Y: ky - vg.Points(6)}, {X: kx + vg.Points(16), Y: ky - vg.Points(6)}, {X: kx + vg.Points(16), Y: ky + vg.Points(6)}, {X: kx, Y: ky + vg.Points(6)}})
			edge := vg.Path{}
			edge.Move(vg.Point{X: kx, Y: ky - vg.Points(6)})
			edge.Line(vg.Point{X: kx + vg.Points(16), Y: ky - vg.Points(6)})
			edge.Line(vg.Point{X: kx + vg.Points(16), Y: ky + vg.Points(6)})
			edge.Line(vg.Point{X: kx, Y: ky + vg.Points(6)})
			edge.Close()
			dc.SetLineStyle(draw.LineStyle{Color: color.Gray{Y: 150}, Width: vg.Points(0.4)})
			dc.Stroke(edge)
			kx = keyText(dc, small, kx+vg.Points(20), ky, fmt.Sprintf("%d %%", 25*i)) + vg.Points(14)
		}
		for u := 0; u < n; u++ {
			px := dc.Min.X + panelW*vg.Length(u%pc)
			py := dc.Max.Y - headH - panelH*vg.Length(u/pc) // top of panel
			maxP := 0.0
			for _, v := range t.PeakToPeak[u] {
				if v > maxP {
					maxP = v
				}
			}
			label := fmt.Sprintf("unit %s: %d discharges averaged", unitName(t, u), t.Averaged[u])
			if t.Averaged[u] < 0 {
				label = fmt.Sprintf("unit %s: stored templates", unitName(t, u))
			}
			dc.FillText(small, vg.Point{X: px + vg.Points(4), Y: py - vg.Points(2)}, label)
			if !(maxP > 0) {
				continue
			}
			// Amplitude bar: the unit's largest peak-to-peak at the traces'
			// scale (0.9 of a cell's height), right of the grid.
			bx := px + vg.Points(6) + cellW*vg.Length(cols)
			btop := py - titleH - cellH*0.05
			dc.StrokeLine2(draw.LineStyle{Color: color.Black, Width: vg.Points(1.2)}, bx, btop, bx, btop-cellH*0.9)
			vs := small
			vs.Rotation = math.Pi / 2
			vs.XAlign, vs.YAlign = draw.XRight, draw.YTop
			dc.FillText(vs, vg.Point{X: bx + vg.Points(2), Y: btop}, fmt.Sprintf("%.3g %s", maxP, unit))
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

// displayUnit writes a UCUM unit for people: "uV" as µV.
func displayUnit(u string) string {
	switch u {
	case "uV":
		return "µV"
	case "":
		return "(unit not known)"
	}
	return u
}

// unitName returns the name of template row u: the unit's label (its id
// when it has none; Templates.Names), the numbering of every table and
// figure; the row number from 1 when the caller gave no names.
func unitName(t *analysis.Templates, u int) string {
	switch {
	case u < len(t.Names):
		return t.Names[u]
	case u < len(t.IDs):
		return strconv.FormatInt(t.IDs[u], 10)
	}
	return strconv.Itoa(u + 1)
}

// keyText writes s left-aligned at x, vertically centred on y, and returns
// where it ends.
func keyText(dc draw.Canvas, st text.Style, x, y vg.Length, s string) vg.Length {
	st.XAlign, st.YAlign = draw.XLeft, draw.YCenter
	dc.FillText(st, vg.Point{X: x, Y: y}, s)
	return x + st.Width(s)
}
