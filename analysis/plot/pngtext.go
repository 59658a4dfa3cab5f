package plot

import (
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/vgimg"
)

// glyphCanvas is the PNG canvas with text set one glyph at a time.
//
// vgimg draws a string through golang.org/x/image's opentype face, whose
// Kern passes the font's units per em where the size in pixels per em
// belongs, so every kerning pair is applied at (units / 64) pixels whatever
// the size: at 9 points and 110 dpi Liberation Sans' "11" pair pulls the
// second digit 2.4 pixels left instead of 1.0, and "unit 11", "n=114"
// come out with digits run together and uneven gaps. Here each glyph is
// placed where gonum's font.Face measures it (advances and kerning scaled
// to the size), so the drawn text has the
// advances the layout measured: digits, which share one advance in the
// face, step evenly.
type glyphCanvas struct {
	*vgimg.Canvas
}

// FillString draws str glyph by glyph.
func (c glyphCanvas) FillString(f font.Face, pt vg.Point, str string) {
	if f.Font.Size == 0 {
		return
	}
	for i, r := range str {
		if r == ' ' {
			continue
		}
		// The glyph's origin: the width up to and including it (with the
		// kerning of the pair it ends) less its own advance.
		g := string(r)
		x := f.Width(str[:i]+g) - f.Width(g)
		c.Canvas.FillString(f, vg.Point{X: pt.X + x, Y: pt.Y}, g)
	}
}
