package report

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"muarc/internal/reftest"
)

// randomPath is path data as gonum/plot's SVG canvas writes it: M, L, A
// (circles of two half arcs) and Z with absolute coordinates of five
// significant digits (%.5g).
func randomPath(r *rand.Rand) string {
	num := func() string {
		v := (r.Float64()*2 - 1) * []float64{1, 50, 700, 3000}[r.IntN(4)]
		if r.IntN(20) == 0 {
			v = float64(r.IntN(600))
		}
		return fmt.Sprintf("%.5g", v)
	}
	var b strings.Builder
	b.WriteString("M" + num() + "," + num())
	for range 1 + r.IntN(40) {
		switch r.IntN(10) {
		case 0:
			b.WriteString("Z")
			if r.IntN(2) == 0 {
				b.WriteString("M" + num() + "," + num())
			}
		case 1:
			b.WriteString("M" + num() + "," + num())
		case 2:
			rad := fmt.Sprintf("%.5g", 0.5+r.Float64()*5)
			b.WriteString(fmt.Sprintf("A%s,%s 0 %d %d %s,%s", rad, rad, r.IntN(2), r.IntN(2), num(), num()))
		default:
			b.WriteString("L" + num() + "," + num())
		}
	}
	return b.String()
}

// TestCompactPathAgreesWithSvgPath: python3-svg.path (Debian) reads the
// rewritten path data of 3000 generated paths and of every path of the
// test study's page as the same segments as the original, every end point
// within 0.05 pt plus float slack (the rounding to a tenth of a point).
func TestCompactPathAgreesWithSvgPath(t *testing.T) {
	py := reftest.NeedPython(t, "svg.path")
	r := rand.New(rand.NewPCG(7, 11))
	var pairs bytes.Buffer
	add := func(d string) {
		c, ok := compactPath([]byte(d))
		if !ok {
			t.Fatalf("not rewritten: %s", d)
		}
		if len(c) >= len(d) && len(d) > 40 {
			t.Errorf("rewritten path not shorter: %d bytes from %d", len(c), len(d))
		}
		pairs.WriteString(d + "\n" + string(c) + "\n")
	}
	for range 3000 {
		add(randomPath(r))
	}
	// Every path of the page's figures (compactSVG is what the page
	// inlines).
	dir := studyFolder(t)
	p, err := Build(dir, BuildOptions{Now: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	figs := append([]Figure{}, p.StudyFigures...)
	for _, s := range p.Recordings {
		figs = append(figs, s.Figures...)
	}
	real := 0
	for _, f := range figs {
		for _, m := range pathData.FindAllSubmatch(f.SVG, -1) {
			add(string(m[1]))
			real++
		}
	}
	if real < 500 {
		t.Fatalf("only %d paths in the test study's figures", real)
	}
	in := filepath.Join(t.TempDir(), "pairs.txt")
	if err := os.WriteFile(in, pairs.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(py, "testdata/compare_paths.py", in, "0.0500001").CombinedOutput()
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	want := fmt.Sprintf("pairs %d segments ", 3000+real)
	if lines := strings.Split(strings.TrimSpace(string(out)), "\n"); len(lines) != 1 || !strings.HasPrefix(lines[0], want) {
		t.Fatalf("svg.path finds differences:\n%.3000s", out)
	}
}

// TestCompactPathLeavesOthers: path data with commands the canvas does
// not write, implicit repetitions or malformed numbers is left as it is.
func TestCompactPathLeavesOthers(t *testing.T) {
	for _, d := range []string{"", "M1,2C3,4 5,6 7,8", "m1,2l3,4", "M1,2L3,4 5,6", "M1,2L3", "M1.2.3,4", "L1,2", "M1,2A1,1 0 2 1 3,4", "M1,2Lx,3"} {
		if c, ok := compactPath([]byte(d)); ok {
			t.Errorf("%q rewritten as %q", d, c)
		}
	}
	for _, c := range []struct{ in, want string }{
		{"M10,20L10.04,20.06L9.95,20Z", "M10,20l0,.1l0-.1z"},
		{"M60.206,367.71A2.2,2.2 0 1 1 55.806,367.71A2.2,2.2 0 1 1 60.206,367.71Z", "M60.2,367.7a2.2,2.2,0 1 1 -4.4,0a2.2,2.2,0 1 1 4.4,0z"},
		{"M-0.04,-0.06L-1.25,3e2", "M0-.1l-1.3,300.1"},
	} {
		got, ok := compactPath([]byte(c.in))
		if !ok || string(got) != c.want {
			t.Errorf("%q: %q, want %q", c.in, got, c.want)
		}
	}
}

// TestInlineWriterInChunks: the study figures, streamed in pieces of any
// size through inlineWriter, come out as inline makes them from the whole
// document.
func TestInlineWriterInChunks(t *testing.T) {
	dir := studyFolder(t)
	p, err := Build(dir, BuildOptions{FigureRecordings: NoFigureRecordings})
	if err != nil {
		t.Fatal(err)
	}
	if len(p.StudyFigures) == 0 {
		t.Fatal("no study figures")
	}
	r := rand.New(rand.NewPCG(1, 2))
	for _, f := range p.StudyFigures {
		want := string(inline(f.SVG))
		for _, size := range []int{1, 3, 64, 4096, 1 << 30} {
			var got bytes.Buffer
			iw := &inlineWriter{w: &got}
			for rest := f.SVG; len(rest) > 0; {
				n := min(len(rest), 1+r.IntN(size))
				if _, err := iw.Write(rest[:n]); err != nil {
					t.Fatal(err)
				}
				rest = rest[n:]
			}
			if err := iw.Close(); err != nil {
				t.Fatal(err)
			}
			if got.String() != want {
				t.Fatalf("pieces of up to %d bytes: %d bytes, inline %d", size, got.Len(), len(want))
			}
		}
	}
}
