package plot

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"math/rand/v2"
	"strings"
	"testing"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// dotsFigure draws 3000 random points (some outside the axes) in two
// colours as gonum/plot's own Scatter or as filledDots.
func dotsFigure(merged bool) *Figure {
	r := rand.New(rand.NewPCG(3, 5))
	p := gplot.New()
	for _, col := range []color.Color{color.RGBA{31, 120, 180, 255}, color.RGBA{227, 26, 28, 255}} {
		xy := make(plotter.XYs, 1500)
		for i := range xy {
			xy[i] = plotter.XY{X: r.NormFloat64()*10 + 30, Y: r.NormFloat64()*3 + 15}
		}
		s, _ := plotter.NewScatter(xy)
		s.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(2.2), Shape: draw.CircleGlyph{}}
		if merged {
			p.Add(filledDots{s})
		} else {
			p.Add(s)
		}
	}
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 5, 55, 5, 25
	return &Figure{Width: 5 * vg.Inch, Height: 4 * vg.Inch, draw: func(c draw.Canvas) { p.Draw(c) }}
}

// TestFilledDotsDrawLikeScatter: the study figures' one-path scatter draws
// the pixels of gonum/plot's Scatter with CircleGlyph (the reference,
// one fill per point). Only anti-aliased edge pixels where two circles of
// one colour overlap may differ (coverage added fill by fill against the
// union's, up to a quarter of the range): on these 3000 dense points about
// 2 % of the pixels, by at most 63 of 255, and the two PNGs look the same
// side by side. Its SVG has one path per series instead of one per point.
func TestFilledDotsDrawLikeScatter(t *testing.T) {
	decode := func(f *Figure) *image.RGBA {
		var b bytes.Buffer
		if err := f.WritePNG(&b); err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(&b)
		if err != nil {
			t.Fatal(err)
		}
		out := image.NewRGBA(img.Bounds())
		for y := img.Bounds().Min.Y; y < img.Bounds().Max.Y; y++ {
			for x := img.Bounds().Min.X; x < img.Bounds().Max.X; x++ {
				out.Set(x, y, img.At(x, y))
			}
		}
		return out
	}
	a, b := decode(dotsFigure(false)), decode(dotsFigure(true))
	if a.Bounds() != b.Bounds() {
		t.Fatalf("sizes %v and %v", a.Bounds(), b.Bounds())
	}
	differ, worst, coloured := 0, 0, 0
	for i := 0; i < len(a.Pix); i += 4 {
		d := 0
		for k := range 3 {
			d = max(d, abs(int(a.Pix[i+k])-int(b.Pix[i+k])))
		}
		if d > 0 {
			differ++
		}
		worst = max(worst, d)
		if a.Pix[i] != a.Pix[i+2] {
			coloured++
		}
	}
	n := len(a.Pix) / 4
	t.Logf("%d of %d pixels differ, by at most %d of 255; %d coloured", differ, n, worst, coloured)
	if coloured < n/20 || differ > n/25 || worst > 64 {
		t.Errorf("%d of %d pixels differ (worst %d), %d coloured", differ, n, worst, coloured)
	}
	var sa, sb bytes.Buffer
	dotsFigure(false).WriteSVG(&sa)
	dotsFigure(true).WriteSVG(&sb)
	pa, pb := strings.Count(sa.String(), "<path"), strings.Count(sb.String(), "<path")
	if pa-pb < 2500 || sb.Len() >= sa.Len() {
		t.Errorf("SVG: %d paths, %d bytes; merged %d paths, %d bytes", pa, sa.Len(), pb, sb.Len())
	}
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}
