package plot

import (
	"fmt"
	"image/color"
	"math"
	"strconv"
	"strings"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"muarc/analysis"
)

// Level labels one decomposition's figures in the scatter, e.g. its trial's
// target level.
type Level struct {
	Stats *analysis.DecompositionStats
	// Label names the series in the legend, e.g. "ramp_30 (30 % MVC)".
	Label string
	// LevelPct is the trial's target level (% MVC); it picks the colour
	// (LevelColor), the same in every figure and the report.
	LevelPct float64
}

// levelPalette gives the usual target levels fixed colours; other levels
// take one from their value.
var levelPalette = map[float64]color.Color{
	5: color.RGBA{166, 206, 227, 255}, 10: color.RGBA{31, 120, 180, 255}, 15: color.RGBA{178, 223, 138, 255},
	20: color.RGBA{51, 160, 44, 255}, 25: color.RGBA{253, 191, 111, 255}, 30: color.RGBA{255, 127, 0, 255},
	40: color.RGBA{202, 178, 214, 255}, 50: color.RGBA{227, 26, 28, 255}, 60: color.RGBA{106, 61, 154, 255},
	70: color.RGBA{177, 89, 40, 255}, 80: color.RGBA{90, 90, 90, 255},
}

// LevelColor is the colour of target level pct (% MVC) in every figure.
func LevelColor(pct float64) color.Color {
	if c, ok := levelPalette[pct]; ok {
		return c
	}
	if math.IsNaN(pct) {
		return color.Black
	}
	return palette[int(math.Abs(math.Round(pct*7)))%len(palette)]
}

// slopeText writes a slope with three significant digits and no "-0".
func slopeText(v float64) string {
	s := strconv.FormatFloat(v, 'g', 3, 64)
	if strings.Trim(s, "-0.") == "" {
		return "0"
	}
	return s
}

// padRange widens [lo, hi] by 6 % on each side so that no point sits on an
// axis edge.
func padRange(lo, hi float64) (float64, float64) {
	d := 0.06 * (hi - lo)
	if d == 0 {
		d = 1
	}
	return lo - d, hi + d
}

// RateThreshold draws plateau mean rate (filled circles, solid regression
// line) and initial rate (open triangles, dashed line) against recruitment
// threshold for each level, one colour per level; the lines are the
// least-squares fits of analysis.DecompositionStats drawn over the range of
// their points.
func RateThreshold(levels []Level) *Figure {
	p := gplot.New()
	// The legend goes in a strip below the plot, where it hides no point.
	leg := gplot.NewLegend()
	leg.Left = true
	leg.Top = true
	leg.Padding = vg.Points(2)
	p.Title.Text = "Discharge rate against recruitment threshold"
	p.X.Label.Text = "recruitment threshold (% MVC)"
	p.Y.Label.Text = "discharge rate (pps)"
	p.Add(plotter.NewGrid())
	xlo, xhi, ylo, yhi := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	for _, lv := range levels {
		col := LevelColor(lv.LevelPct)
		var plat, init plotter.XYs
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, u := range lv.Stats.Units {
			if math.IsNaN(u.RecruitPctMVC) {
				continue
			}
			if !math.IsNaN(u.PlateauRatePPS) {
				plat = append(plat, plotter.XY{X: u.RecruitPctMVC, Y: u.PlateauRatePPS})
				lo, hi = math.Min(lo, u.RecruitPctMVC), math.Max(hi, u.RecruitPctMVC)
				ylo, yhi = math.Min(ylo, u.PlateauRatePPS), math.Max(yhi, u.PlateauRatePPS)
			}
			if !math.IsNaN(u.InitialRatePPS) {
				init = append(init, plotter.XY{X: u.RecruitPctMVC, Y: u.InitialRatePPS})
				lo, hi = math.Min(lo, u.RecruitPctMVC), math.Max(hi, u.RecruitPctMVC)
				ylo, yhi = math.Min(ylo, u.InitialRatePPS), math.Max(yhi, u.InitialRatePPS)
			}
		}
		series := func(xy plotter.XYs, shape draw.GlyphDrawer, fit analysis.Fit, dashed bool, what string) {
			if len(xy) == 0 {
				return
			}
			s, err := plotter.NewScatter(xy)
			if err != nil {
				return
			}
			s.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(3), Shape: shape}
			p.Add(s)
			label := fmt.Sprintf("%s %s (n=%d)", lv.Label, what, fit.N)
			if !math.IsNaN(fit.Slope) {
				l, err := plotter.NewLine(plotter.XYs{{X: lo, Y: fit.Slope*lo + fit.Intercept}, {X: hi, Y: fit.Slope*hi + fit.Intercept}})
				if err == nil {
					l.Color = col
					l.Width = vg.Points(1.2)
					if dashed {
						l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
					}
					p.Add(l)
					label += fmt.Sprintf(", slope %s pps/%%MVC, R² %.2f", slopeText(fit.Slope), fit.R2)
				}
			}
			leg.Add(label, s)
		}
		series(plat, draw.CircleGlyph{}, lv.Stats.PlateauRateFit, false, "plateau")
		series(init, draw.TriangleGlyph{}, lv.Stats.InitialRateFit, true, "initial")
		xlo, xhi = math.Min(xlo, lo), math.Max(xhi, hi)
	}
	if !math.IsInf(xlo, 0) {
		p.X.Min, p.X.Max = padRange(math.Min(0, xlo), xhi)
		_, p.Y.Max = padRange(math.Min(0, ylo), yhi)
	}
	p.Y.Min = 0
	p.X.Tick.Marker = plainTicks{}
	p.Y.Tick.Marker = plainTicks{}
	entries := 0
	for _, lv := range levels {
		entries += 2
		_ = lv
	}
	legH := vg.Points(14)*vg.Length(entries) + vg.Points(10)
	plotH := 5 * vg.Inch
	return &Figure{Width: 8 * vg.Inch, Height: plotH + legH, draw: func(dc draw.Canvas) {
		top := draw.Crop(dc, vg.Points(4), -vg.Points(10), legH, -vg.Points(4))
		p.Draw(top)
		bottom := draw.Crop(dc, vg.Points(60), 0, 0, -(plotH + vg.Points(4)))
		leg.Draw(bottom)
	}}
}
