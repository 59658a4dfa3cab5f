package plot

import (
	"fmt"
	"math"

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
	for i, lv := range levels {
		col := unitColor(i)
		var plat, init plotter.XYs
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, u := range lv.Stats.Units {
			if math.IsNaN(u.RecruitPctMVC) {
				continue
			}
			if !math.IsNaN(u.PlateauRatePPS) {
				plat = append(plat, plotter.XY{X: u.RecruitPctMVC, Y: u.PlateauRatePPS})
				lo, hi = math.Min(lo, u.RecruitPctMVC), math.Max(hi, u.RecruitPctMVC)
			}
			if !math.IsNaN(u.InitialRatePPS) {
				init = append(init, plotter.XY{X: u.RecruitPctMVC, Y: u.InitialRatePPS})
				lo, hi = math.Min(lo, u.RecruitPctMVC), math.Max(hi, u.RecruitPctMVC)
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
					label += fmt.Sprintf(", slope %.2f pps/%%MVC, R² %.2f", fit.Slope, fit.R2)
				}
			}
			leg.Add(label, s)
		}
		series(plat, draw.CircleGlyph{}, lv.Stats.PlateauRateFit, false, "plateau")
		series(init, draw.TriangleGlyph{}, lv.Stats.InitialRateFit, true, "initial")
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
