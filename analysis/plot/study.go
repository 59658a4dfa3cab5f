package plot

import (
	"fmt"
	"image/color"
	"math"
	"os"
	"path/filepath"
	"sort"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"muarc/analysis/study"
)

// StudySubjectsPerFigure is the most subjects one study figure shows side
// by side (a column of 3.2 inches each): a muscle with more subjects gets
// its figure in parts of this many subjects (in the order of their codes),
// every part on the same axes, so that no column shrinks below its tick
// labels however large the study.
const StudySubjectsPerFigure = 10

// StudyFigures draws, per muscle of a study analysis, the subjects side by
// side (one column each) with plateau mean rate (top row) and initial rate
// (bottom row) against recruitment threshold: points and least-squares
// lines in one colour per target level (LevelColor), R^2 of each line
// written in the panel, the same axes in a row and in every part of a
// muscle (StudySubjectsPerFigure). Named.Subjects lists each figure's
// subjects.
func StudyFigures(res *study.Result) []Named {
	var muscles []string
	subjects := map[string][]string{}
	seen := map[[2]string]bool{}
	for _, r := range res.Rows {
		if subjects[r.Muscle] == nil {
			muscles = append(muscles, r.Muscle)
		}
		if k := [2]string{r.Muscle, r.Subject}; !seen[k] {
			seen[k] = true
			subjects[r.Muscle] = append(subjects[r.Muscle], r.Subject)
		}
	}
	var out []Named
	for _, m := range muscles {
		all := subjects[m]
		sort.Strings(all)
		parts := (len(all) + StudySubjectsPerFigure - 1) / StudySubjectsPerFigure
		for k := range parts {
			part := all[k*StudySubjectsPerFigure : min(len(all), (k+1)*StudySubjectsPerFigure)]
			name, title, which := stem("study", m, "rate_threshold"), m, ""
			if parts > 1 {
				name += fmt.Sprintf("__part%02d_of_%02d", k+1, parts)
				which = fmt.Sprintf(" (subjects %s to %s, part %d of %d)", part[0], part[len(part)-1], k+1, parts)
				title += which
			}
			out = append(out, Named{Name: name, Kind: "study", Muscle: m, Subjects: part,
				Caption: fmt.Sprintf("%s%s: discharge rate against recruitment threshold per subject (columns); top plateau mean rate, bottom initial rate; one colour per target level, least-squares line and its R² per level.", m, which),
				Figure:  muscleFigure(res, m, title, part)})
		}
	}
	return out
}

// SaveStudyFigures writes the study figures (StudyFigures) into folder out
// as PNG and SVG, each file atomically, replacing earlier ones, and returns
// them for the results' provenance (study.Result.Figures).
func SaveStudyFigures(out string, res *study.Result) ([]study.FigureFile, error) {
	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, err
	}
	var files []study.FigureFile
	for _, n := range StudyFigures(res) {
		for _, ext := range []string{".png", ".svg"} {
			if err := n.Figure.Save(filepath.Join(out, n.Name+ext), true); err != nil {
				return files, err
			}
			files = append(files, study.FigureFile{File: n.Name + ext, Caption: n.Caption})
		}
	}
	return files, nil
}

// filledDots draws a scatter of CircleGlyph points as one filled path of
// circles, not one path per point: the same drawing (points of one colour,
// nonzero fill), but one SVG element per series, so that the figure of a
// study of thousands of recordings stays a few bytes per point. Axis
// ranges and glyph boxes are the scatter's.
type filledDots struct{ *plotter.Scatter }

func (d filledDots) Plot(c draw.Canvas, plt *gplot.Plot) {
	trX, trY := plt.Transforms(&c)
	r := d.GlyphStyle.Radius
	var path vg.Path
	for _, xy := range d.XYs {
		pt := vg.Point{X: trX(xy.X), Y: trY(xy.Y)}
		if !c.Contains(pt) {
			continue // as draw.Canvas.DrawGlyph
		}
		path.Move(vg.Point{X: pt.X + r, Y: pt.Y})
		path.Arc(pt, r, 0, 2*math.Pi)
		path.Close()
	}
	if len(path) > 0 {
		c.SetColor(d.GlyphStyle.Color)
		c.Fill(path)
	}
}

// r2Labels writes "<level> % MVC: R² x" lines in the top right of a panel.
type r2Labels struct {
	lines  []string
	colors []color.Color
}

func (l r2Labels) Plot(c draw.Canvas, p *gplot.Plot) {
	for i, s := range l.lines {
		st := text.Style{Color: l.colors[i], Font: font.From(gplot.DefaultFont, 8), Handler: gplot.DefaultTextHandler,
			XAlign: draw.XRight, YAlign: draw.YTop}
		c.FillText(st, vg.Point{X: c.Max.X - vg.Points(3), Y: c.Max.Y - vg.Points(3) - vg.Points(10)*vg.Length(i)}, s)
	}
}

// muscleFigure draws the given subjects of a muscle side by side under the
// heading title; the axes span every subject of the muscle, so that the
// parts of one muscle compare.
func muscleFigure(res *study.Result, muscle, title string, subjects []string) *Figure {
	plots := make([][]*gplot.Plot, len(study.Relations))
	for ri, rel := range study.Relations {
		xmax, ymax := 0.0, 0.0
		for _, r := range res.Rows {
			if r.Muscle == muscle && r.Relation == rel {
				for _, p := range r.Points {
					xmax, ymax = math.Max(xmax, p[0]), math.Max(ymax, p[1])
				}
			}
		}
		for _, subj := range subjects {
			p := gplot.New()
			p.Add(plotter.NewGrid())
			if ri == 0 {
				p.Title.Text = "subject " + subj
			}
			if subj == subjects[0] {
				p.Y.Label.Text = map[string]string{study.PlateauRate: "plateau rate (pps)", study.InitialRate: "initial rate (pps)"}[rel]
			}
			if ri == len(study.Relations)-1 {
				p.X.Label.Text = "recruitment threshold (% MVC)"
			}
			var labels r2Labels
			for _, r := range res.Rows {
				if r.Muscle != muscle || r.Relation != rel || r.Subject != subj || len(r.Points) == 0 {
					continue
				}
				col := LevelColor(r.LevelPct)
				xy := make(plotter.XYs, len(r.Points))
				lo, hi := math.Inf(1), math.Inf(-1)
				for i, pt := range r.Points {
					xy[i] = plotter.XY{X: pt[0], Y: pt[1]}
					lo, hi = math.Min(lo, pt[0]), math.Max(hi, pt[0])
				}
				if s, err := plotter.NewScatter(xy); err == nil {
					s.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(2.2), Shape: draw.CircleGlyph{}}
					p.Add(filledDots{s})
				}
				f := r.Fit
				if !math.IsNaN(f.Slope) {
					if l, err := plotter.NewLine(plotter.XYs{{X: lo, Y: f.Slope*lo + f.Intercept}, {X: hi, Y: f.Slope*hi + f.Intercept}}); err == nil {
						l.Color, l.Width = col, vg.Points(1.2)
						p.Add(l)
					}
					labels.lines = append(labels.lines, fmt.Sprintf("%g %% MVC: R² %.2f", r.LevelPct, f.R2))
					labels.colors = append(labels.colors, col)
				}
			}
			p.Add(labels)
			p.X.Min, p.X.Max = padRange(0, xmax)
			p.Y.Min, p.Y.Max = 0, ymax*1.35+1
			p.X.Tick.Marker, p.Y.Tick.Marker = plainTicks{}, plainTicks{}
			plots[ri] = append(plots[ri], p)
		}
	}
	cols := max(1, len(subjects))
	w := vg.Length(cols)*3.2*vg.Inch + 0.6*vg.Inch
	return &Figure{Width: w, Height: 6.4 * vg.Inch, draw: func(dc draw.Canvas) {
		hdr := text.Style{Color: color.Black, Font: font.From(gplot.DefaultFont, 12), Handler: gplot.DefaultTextHandler, XAlign: draw.XLeft, YAlign: draw.YTop}
		dc.FillText(hdr, vg.Point{X: dc.Min.X + vg.Points(6), Y: dc.Max.Y - vg.Points(4)}, title)
		// Provenance in a footer line of its own: what computed it, when,
		// from how many recordings.
		prov := hdr
		prov.Font = font.From(gplot.DefaultFont, 8)
		prov.Color = color.Gray{Y: 90}
		prov.YAlign = draw.YBottom
		dc.FillText(prov, vg.Point{X: dc.Min.X + vg.Points(6), Y: dc.Min.Y + vg.Points(3)},
			fmt.Sprintf("%s, %s, from %d recordings", res.Software, res.Computed.UTC().Format("2006-01-02 15:04 UTC"), len(res.Sources)))
		body := draw.Crop(dc, 0, 0, vg.Points(12), -vg.Points(18))
		tiles := draw.Tiles{Rows: len(study.Relations), Cols: cols, PadTop: vg.Points(4), PadBottom: vg.Points(4),
			PadLeft: vg.Points(4), PadRight: vg.Points(10), PadX: vg.Points(10), PadY: vg.Points(10)}
		canv := gplot.Align(plots, tiles, body)
		for i := range plots {
			for j := range plots[i] {
				plots[i][j].Draw(canv[i][j])
			}
		}
	}}
}
