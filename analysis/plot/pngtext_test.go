package plot

import (
	"bytes"
	"image/color"
	"image/png"
	"math"
	"testing"

	"golang.org/x/image/font/sfnt"
	"golang.org/x/image/math/fixed"
	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// inkStarts renders s in 9 point Liberation Sans at PNGDPI through
// Figure.WritePNG and returns the pixel columns where a run of ink starts
// (one per glyph when glyphs do not touch).
func inkStarts(t *testing.T, s string, x0 vg.Length) []int {
	t.Helper()
	fig := &Figure{Width: 4 * vg.Inch, Height: 0.4 * vg.Inch, draw: func(dc draw.Canvas) {
		st := text.Style{Color: color.Black, Font: font.From(gplot.DefaultFont, 9), Handler: gplot.DefaultTextHandler}
		dc.FillText(st, vg.Point{X: x0, Y: vg.Points(8)}, s)
	}}
	var b bytes.Buffer
	if err := fig.WritePNG(&b); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&b)
	if err != nil {
		t.Fatal(err)
	}
	var starts []int
	prev := false
	r := img.Bounds()
	for x := r.Min.X; x < r.Max.X; x++ {
		on := false
		for y := r.Min.Y; y < r.Max.Y && !on; y++ {
			on = color.GrayModel.Convert(img.At(x, y)).(color.Gray).Y < 140
		}
		if on && !prev {
			starts = append(starts, x)
		}
		prev = on
	}
	return starts
}

// TestPNGDigitAdvance measures the ink columns of rendered digit strings:
// each glyph starts one advance (plus the face's kerning for the pair)
// after the one before. The expected step comes from the font file itself
// read by golang.org/x/image/font/sfnt (its hmtx advances and kern pairs,
// scaled to 9 points at PNGDPI), not from our drawing code.
func TestPNGDigitAdvance(t *testing.T) {
	face := font.DefaultCache.Lookup(gplot.DefaultFont, 9)
	ppem := 9.0 * PNGDPI / 72
	upm := fixed.Int26_6(face.Face.UnitsPerEm())
	var buf sfnt.Buffer
	step := func(a, b rune) float64 {
		ia, _ := face.Face.GlyphIndex(&buf, a)
		ib, _ := face.Face.GlyphIndex(&buf, b)
		adv, err := face.Face.GlyphAdvance(&buf, ia, upm, 0)
		if err != nil {
			t.Fatal(err)
		}
		k, err := face.Face.Kern(&buf, ia, ib, upm, 0)
		if err != nil {
			k = 0
		}
		return float64(adv+k) / 64 * ppem / (float64(face.Face.UnitsPerEm()) / 64)
	}
	for _, s := range []string{"1111111", "1212121", "0000000", "9119119"} {
		for _, x0 := range []vg.Length{5, 5.3, 5.6} { // sub-pixel origins
			got := inkStarts(t, s, x0)
			rs := []rune(s)
			if len(got) != len(rs) {
				t.Errorf("%q at x %.1f: %d runs of ink for %d glyphs (glyphs run together): starts %v", s, x0, len(got), len(rs), got)
				continue
			}
			// Ink starts differ from origins by each glyph's left side
			// bearing: compare steps between equal glyphs only.
			for i := 1; i < len(rs); i++ {
				want := step(rs[i-1], rs[i])
				if rs[i-1] == rs[i] {
					if d := float64(got[i] - got[i-1]); math.Abs(d-want) > 1 {
						t.Errorf("%q at x %.1f: glyph %d to %d is %v px, the font says %.2f", s, x0, i-1, i, d, want)
					}
				}
			}
		}
	}
}
