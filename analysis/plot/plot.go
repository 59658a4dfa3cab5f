// Package plot draws the figures of a recording with gonum.org/v1/plot, as
// PNG or SVG: per trial an overview (force and target, discharge raster,
// smoothed discharge rates), the discharge-rate-versus-recruitment-threshold
// scatter with its regression lines, and the MUAP template grid.
//
// Text is set in the Liberation Sans face that gonum/plot embeds, so the
// figures draw the same on every machine; SVG refers to the face by name
// and a browser without it substitutes a sans-serif face.
package plot

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	"muarc/analysis"
	"muarc/internal/atomicfile"
	"muarc/record"
)

func init() {
	gplot.DefaultFont = font.Font{Typeface: "Liberation", Variant: "Sans"}
	plotter.DefaultFont = gplot.DefaultFont
}

// Figure is a drawing of a fixed size that renders to PNG or SVG.
type Figure struct {
	// Width and Height are the figure's size (vg lengths: 1 inch = 72 points).
	Width, Height vg.Length
	draw          func(draw.Canvas)
}

// PNGDPI is the resolution of PNG output, dots per inch.
const PNGDPI = 110

// WritePNG renders the figure as PNG.
func (f *Figure) WritePNG(w io.Writer) error {
	c := vgimg.NewWith(vgimg.UseWH(f.Width, f.Height), vgimg.UseDPI(PNGDPI), vgimg.UseBackgroundColor(color.White))
	f.draw(draw.New(glyphCanvas{c}))
	_, err := vgimg.PngCanvas{Canvas: c}.WriteTo(w)
	return err
}

// WriteSVG renders the figure as SVG (fonts referred to by name, not
// embedded).
func (f *Figure) WriteSVG(w io.Writer) error {
	c := vgsvg.New(f.Width, f.Height)
	dc := draw.New(c)
	dc.SetColor(color.White)
	dc.Fill(dc.Rectangle.Path())
	f.draw(dc)
	_, err := c.WriteTo(w)
	return err
}

// Save writes the figure to path atomically, as PNG or SVG by the
// extension (.png, .svg).
func (f *Figure) Save(path string, overwrite bool) error {
	var write func(io.Writer) error
	switch strings.ToLower(filepath.Ext(path)) {
	case ".png":
		write = f.WritePNG
	case ".svg":
		write = f.WriteSVG
	default:
		return fmt.Errorf("%s: unknown figure format (use .png or .svg)", path)
	}
	return atomicfile.Write(path, overwrite, func(fh *os.File) error { return write(fh) })
}

// maxLinePoints bounds the points drawn for a trace: longer traces are
// averaged over equal buckets first (a display choice; the data are not
// changed).
const maxLinePoints = 2000

// rateStepS is the time step of drawn smoothed rates: 50 ms, an eighth of
// the 400 ms smoothing window.
const rateStepS = 0.05

// traceXY returns signal s times scale as plot points, bucket-averaged to at
// most maxLinePoints.
func traceXY(s record.Signal, scale float64) plotter.XYs {
	n := len(s.Values)
	step := (n + maxLinePoints - 1) / maxLinePoints
	if step < 1 {
		step = 1
	}
	var xy plotter.XYs
	for i := 0; i < n; i += step {
		j := min(i+step, n)
		var sum float64
		for _, v := range s.Values[i:j] {
			sum += v
		}
		t := s.StartS + (float64(i)+float64(j-1-i)/2)/s.SamplingRateHz
		xy = append(xy, plotter.XY{X: t, Y: sum / float64(j-i) * scale})
	}
	return xy
}

// raster draws one row of vertical ticks per unit.
type raster struct {
	rows   [][]float64
	colors []color.Color
	t0, t1 float64
}

func (r raster) Plot(c draw.Canvas, p *gplot.Plot) {
	trX, trY := p.Transforms(&c)
	for i, row := range r.rows {
		var path vg.Path
		y0, y1 := trY(float64(i+1)-0.38), trY(float64(i+1)+0.38)
		for _, t := range row {
			x := trX(t)
			path.Move(vg.Point{X: x, Y: y0})
			path.Line(vg.Point{X: x, Y: y1})
		}
		c.SetLineStyle(draw.LineStyle{Color: r.colors[i], Width: vg.Points(0.6)})
		c.Stroke(path)
	}
}

func (r raster) DataRange() (xmin, xmax, ymin, ymax float64) {
	return r.t0, r.t1, 0.4, float64(len(r.rows)) + 0.6
}

// palette holds 12 colours told apart in print and by most colour-vision
// deficiencies (the qualitative "Paired" scheme reordered, common
// practice); series beyond 12 repeat them and are keyed by text labels.
var palette = []color.Color{
	color.RGBA{31, 120, 180, 255}, color.RGBA{227, 26, 28, 255}, color.RGBA{51, 160, 44, 255},
	color.RGBA{255, 127, 0, 255}, color.RGBA{106, 61, 154, 255}, color.RGBA{177, 89, 40, 255},
	color.RGBA{166, 206, 227, 255}, color.RGBA{251, 154, 153, 255}, color.RGBA{178, 223, 138, 255},
	color.RGBA{253, 191, 111, 255}, color.RGBA{202, 178, 214, 255}, color.RGBA{90, 90, 90, 255},
}

// unitColor is the colour of the i-th unit in recruitment order.
func unitColor(i int) color.Color { return palette[i%len(palette)] }

// message is a plot element that writes a line of text in the middle of
// the data area (e.g. "no units").
type message struct{ text string }

func (m message) Plot(c draw.Canvas, p *gplot.Plot) {
	st := text.Style{Color: color.RGBA{90, 90, 90, 255}, Font: font.From(gplot.DefaultFont, 14), Handler: gplot.DefaultTextHandler,
		XAlign: draw.XCenter, YAlign: draw.YCenter}
	c.FillText(st, vg.Point{X: (c.Min.X + c.Max.X) / 2, Y: (c.Min.Y + c.Max.Y) / 2}, m.text)
}

// endLabels writes each unit's id at the right end of its rate curve, in
// its colour: the key of the rate panel, however many units there are.
type endLabels struct {
	at     plotter.XYs
	labels []string
	colors []color.Color
}

func (e endLabels) Plot(c draw.Canvas, p *gplot.Plot) {
	trX, trY := p.Transforms(&c)
	// Labels ending close together are pushed apart vertically (8 points).
	type lab struct {
		x, y vg.Length
		i    int
	}
	ls := make([]lab, len(e.at))
	for i, xy := range e.at {
		ls[i] = lab{trX(xy.X), trY(xy.Y), i}
	}
	sort.Slice(ls, func(a, b int) bool { return ls[a].y < ls[b].y })
	for k := 1; k < len(ls); k++ {
		for j := 0; j < k; j++ {
			if vgAbs(ls[k].x-ls[j].x) < vg.Points(14) && ls[k].y-ls[j].y < vg.Points(8) {
				ls[k].y = ls[j].y + vg.Points(8)
			}
		}
	}
	for _, l := range ls {
		st := text.Style{Color: e.colors[l.i], Font: font.From(gplot.DefaultFont, 8), Handler: gplot.DefaultTextHandler,
			XAlign: draw.XLeft, YAlign: draw.YCenter}
		c.FillText(st, vg.Point{X: l.x + vg.Points(2), Y: l.y}, e.labels[l.i])
	}
}

func vgAbs(v vg.Length) vg.Length {
	if v < 0 {
		return -v
	}
	return v
}

// Overview draws the trial's force and target (% MVC when the MVC is known,
// else force units) with the plateau shaded, the discharge raster of every
// unit of dec (ordered by recruitment, earliest at the bottom), and their
// discharge rates smoothed by a 400 ms Hann window
// (analysis.SmoothedRatePPS), over one time axis.
func Overview(tr *record.Trial, arr *record.Array, dec *record.Decomposition, ds *analysis.DecompositionStats) *Figure {
	t0, t1 := math.Inf(1), math.Inf(-1)
	span := func(a, b float64) {
		t0, t1 = math.Min(t0, a), math.Max(t1, b)
	}
	if tr.Force.Present() {
		span(tr.Force.StartS, tr.Force.StartS+tr.Force.DurationS())
	}
	if tr.ForceTarget.Present() {
		span(tr.ForceTarget.StartS, tr.ForceTarget.StartS+tr.ForceTarget.DurationS())
	}
	if d := arr.DurationS(); d > 0 {
		span(arr.StartS, arr.StartS+d)
	}
	// Units in recruitment order.
	type ut struct {
		name  string
		times []float64
	}
	var units []ut
	for _, u := range dec.Units {
		if len(u.Discharges) == 0 || !(arr.SamplingRateHz > 0) {
			continue
		}
		t := analysis.DischargeTimesS(u.Discharges, arr.SamplingRateHz, arr.StartS)
		units = append(units, ut{u.Name(), t})
		span(t[0], t[len(t)-1])
	}
	if math.IsInf(t0, 0) {
		t0, t1 = 0, 1
	}
	for i := 1; i < len(units); i++ {
		for j := i; j > 0 && units[j].times[0] < units[j-1].times[0]; j-- {
			units[j], units[j-1] = units[j-1], units[j]
		}
	}

	// Force and target.
	pf := gplot.New()
	pf.Title.Text = fmt.Sprintf("Trial %s, array %s, decomposition %s", tr.Name, arr.Name, dec.Name)
	pf.Y.Label.Text = "force"
	legend := false
	addTrace := func(s record.Signal, name string, dashed bool, col color.Color) {
		if !s.Present() {
			return
		}
		sc := analysis.ScaleOf(tr, s)
		scale, unit := sc.ToPct, "% MVC"
		if math.IsNaN(scale) {
			scale, unit = 1, sc.Unit
		}
		pf.Y.Label.Text = "force (" + unit + ")"
		l, err := plotter.NewLine(traceXY(s, scale))
		if err != nil {
			return
		}
		l.Color = col
		l.Width = vg.Points(1.2)
		if dashed {
			l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		}
		pf.Add(l)
		pf.Legend.Add(name, l)
		legend = true
	}
	if ds != nil && ds.Plateau != nil {
		band := &plateauBand{ds.Plateau.StartS, ds.Plateau.EndS}
		pf.Add(band)
	}
	addTrace(tr.ForceTarget, "target", true, color.RGBA{R: 200, G: 60, B: 40, A: 255})
	addTrace(tr.Force, "force", false, color.Black)
	if legend {
		// The key sits top left in headroom above the traces, never on them.
		pf.Legend.Top = true
		pf.Legend.Left = true
		pf.Legend.XOffs = vg.Points(4)
		pf.Y.Min = math.Min(0, pf.Y.Min)
		pf.Y.Max = pf.Y.Max + 0.35*(pf.Y.Max-pf.Y.Min)
	}

	// Raster: one row per unit in recruitment order, labelled by the
	// unit's label, its id when it has none (record.Unit.Name: the
	// numbering of the unit table, the MUAP panels and the stats).
	pr := gplot.New()
	pr.Y.Label.Text = "unit (by recruitment)"
	rs := raster{t0: t0, t1: t1}
	ids := make([]string, len(units))
	for i, u := range units {
		rs.rows = append(rs.rows, u.times)
		rs.colors = append(rs.colors, unitColor(i))
		ids[i] = u.name
	}
	pr.Add(rs)
	pr.Y.Tick.Marker = unitTicks{ids}
	if len(units) == 0 {
		pr.Add(message{"no units in this decomposition"})
	}

	// Smoothed rates.
	pq := gplot.New()
	pq.X.Label.Text = "time from trial start (s)"
	pq.Y.Label.Text = "smoothed rate (pps)"
	var ends endLabels
	for i, u := range units {
		a, b := u.times[0], u.times[len(u.times)-1]
		r := analysis.SmoothedRatePPS(u.times, a, b+rateStepS, rateStepS, analysis.SmoothedRateWindowS)
		xy := make(plotter.XYs, len(r))
		for k := range r {
			xy[k] = plotter.XY{X: a + float64(k)*rateStepS, Y: r[k]}
		}
		if len(xy) < 2 {
			continue
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			continue
		}
		l.Color = unitColor(i)
		l.Width = vg.Points(1)
		pq.Add(l)
		ends.at = append(ends.at, xy[len(xy)-1])
		ends.labels = append(ends.labels, ids[i])
		ends.colors = append(ends.colors, unitColor(i))
	}
	pq.Add(ends)
	if len(units) == 0 {
		pq.Add(message{"no units: no discharge rates"})
		pq.Y.Max = 1
	}
	for _, p := range []*gplot.Plot{pf, pr, pq} {
		p.X.Min, p.X.Max = t0, t1
		p.X.Tick.Marker = plainTicks{}
		p.Add(plotter.NewGrid())
	}
	pq.Y.Min = 0
	pf.Y.Tick.Marker = plainTicks{}
	pq.Y.Tick.Marker = plainTicks{}
	plots := [][]*gplot.Plot{{pf}, {pr}, {pq}}
	return &Figure{Width: 9 * vg.Inch, Height: 8 * vg.Inch, draw: func(dc draw.Canvas) {
		tiles := draw.Tiles{Rows: 3, Cols: 1, PadTop: vg.Points(6), PadBottom: vg.Points(6),
			PadLeft: vg.Points(6), PadRight: vg.Points(12), PadY: vg.Points(8)}
		canv := gplot.Align(plots, tiles, dc)
		for i := range plots {
			plots[i][0].Draw(canv[i][0])
		}
	}}
}

// plateauBand shades the plateau's time span over the whole plot height.
type plateauBand struct{ a, b float64 }

func (p *plateauBand) Plot(c draw.Canvas, pl *gplot.Plot) {
	trX, _ := pl.Transforms(&c)
	x0, x1 := trX(p.a), trX(p.b)
	c.FillPolygon(color.RGBA{R: 225, G: 235, B: 250, A: 255}, []vg.Point{
		{X: x0, Y: c.Min.Y}, {X: x1, Y: c.Min.Y}, {X: x1, Y: c.Max.Y}, {X: x0, Y: c.Max.Y}})
}

// plainTicks put labelled ticks at a round step (1, 2, 2.5 or 5 times a
// power of ten) giving about six labels over the range, with unlabelled
// minor ticks between, labelled in the shortest decimal form ("25", not
// "25.00", never "-0").
type plainTicks struct{}

func (plainTicks) Ticks(lo, hi float64) []gplot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return gplot.DefaultTicks{}.Ticks(lo, hi)
	}
	raw := (hi - lo) / 6
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := 10 * mag
	for _, f := range []float64{1, 2, 2.5, 5, 10} {
		if f*mag >= raw {
			step = f * mag
			break
		}
	}
	minor := step / 5
	var ts []gplot.Tick
	k0 := math.Ceil(lo/minor - 1e-9)
	for k := k0; k*minor <= hi+1e-9*minor; k++ {
		v := k * minor
		t := gplot.Tick{Value: v}
		if r := math.Round(v / step); math.Abs(v/step-r) < 1e-6 {
			v = r * step
			if v == 0 {
				v = 0 // no "-0"
			}
			t.Value = v
			t.Label = strconv.FormatFloat(v, 'g', 6, 64)
		}
		ts = append(ts, t)
	}
	return ts
}

// unitTicks label raster rows 1..n with the units' ids, every k-th one so
// that at most about 25 labels show.
type unitTicks struct{ ids []string }

func (u unitTicks) Ticks(lo, hi float64) []gplot.Tick {
	n := len(u.ids)
	k := max(1, (n+24)/25)
	var ts []gplot.Tick
	for i := 1; i <= n; i++ {
		t := gplot.Tick{Value: float64(i)}
		if i == 1 || i%k == 0 {
			t.Label = u.ids[i-1]
		}
		ts = append(ts, t)
	}
	return ts
}
