package plot

import (
	"bytes"
	"encoding/xml"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"muarc/analysis"
	"muarc/record"
)

// fixture is a small hand-built trial: a 20 % MVC trapezoid at 1000 Hz, a
// 2 x 3 grid with six units firing steadily at rates that fall with their
// thresholds, and EMG carrying one spike shape per unit.
func fixture() (*record.Trial, *analysis.DecompositionStats, *analysis.Templates) {
	const fs = 1000.0
	n := int(12 * fs)
	tgt := make([]float64, n)
	for i := range tgt {
		t := float64(i) / fs
		tgt[i] = 20 * math.Max(0, math.Min(1, math.Min((t-1)/3, (11-t)/3)))
	}
	frc := make([]float64, n)
	for i := range frc {
		frc[i] = tgt[i] * 3 // MVC 300 N
	}
	tr := &record.Trial{Name: "ramp_20", TargetPctMVC: 20, MVC: 300, MVCUnit: "N",
		Force:       record.Signal{SamplingRateHz: fs, Unit: "N", Values: frc},
		ForceTarget: record.Signal{SamplingRateHz: fs, Unit: "%", Values: tgt}}
	m := &record.MemSamples{Samples: n, Channels: 6, F32: make([]float32, n*6)}
	var chans []record.Channel
	for c := 0; c < 6; c++ {
		chans = append(chans, record.Channel{Label: string(rune('a' + c)), Row: c / 3, Column: c % 3, Usable: c != 4})
	}
	arr := record.Array{Name: "grid", Rows: 2, Columns: 3, SamplingRateHz: fs, Unit: "uV", Channels: chans, Samples: m}
	dec := record.Decomposition{Name: "auto"}
	for k := 0; k < 6; k++ {
		u := record.NewUnit(int64(k + 1))
		on := 1.5 + 0.4*float64(k)
		rate := 16 - float64(k)
		for t := on; t < 12.5-on; t += 1 / rate {
			d := int64(t * fs)
			u.Discharges = append(u.Discharges, d)
			for l := -3; l <= 3; l++ {
				for c := 0; c < 6; c++ {
					m.F32[(int(d)+l)*6+c] += float32(float64(10*(k+1)*(c+1)) * math.Sin(float64(l)*math.Pi/3))
				}
			}
		}
		dec.Units = append(dec.Units, u)
	}
	arr.Decompositions = []record.Decomposition{dec}
	tr.Arrays = []record.Array{arr}
	ds := analysis.Decomposition(tr, &tr.Arrays[0], &tr.Arrays[0].Decompositions[0])
	ts, err := analysis.ArrayTemplates(&tr.Arrays[0], analysis.MUAPHalfWindowS)
	if err != nil {
		panic(err)
	}
	return tr, &ds, ts[0]
}

func checkFigure(t *testing.T, f *Figure, dir, name string) {
	t.Helper()
	var pb bytes.Buffer
	if err := f.WritePNG(&pb); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(pb.Bytes()))
	if err != nil {
		t.Fatalf("%s: PNG does not decode: %v", name, err)
	}
	// The PNG's pixel size is the figure size at PNGDPI.
	wantW := int(math.Round(f.Width.Points() / 72 * PNGDPI))
	if w := img.Bounds().Dx(); w < wantW-1 || w > wantW+1 {
		t.Errorf("%s: PNG width %d, want %d", name, w, wantW)
	}
	var sb bytes.Buffer
	if err := f.WriteSVG(&sb); err != nil {
		t.Fatal(err)
	}
	// The SVG is well-formed XML with an <svg> root (encoding/xml as the
	// parser).
	dec := xml.NewDecoder(bytes.NewReader(sb.Bytes()))
	root := ""
	paths := 0
	for {
		tok, err := dec.Token()
		if err != nil {
			if err.Error() != "EOF" {
				t.Fatalf("%s: SVG is not well-formed: %v", name, err)
			}
			break
		}
		if se, ok := tok.(xml.StartElement); ok {
			if root == "" {
				root = se.Name.Local
			}
			if se.Name.Local == "path" {
				paths++
			}
		}
	}
	if root != "svg" || paths < 10 {
		t.Errorf("%s: SVG root %q with %d paths", name, root, paths)
	}
	if dir != "" {
		os.WriteFile(filepath.Join(dir, name+".png"), pb.Bytes(), 0o644)
		os.WriteFile(filepath.Join(dir, name+".svg"), sb.Bytes(), 0o644)
	}
}

func TestFiguresRender(t *testing.T) {
	tr, ds, tp := fixture()
	// MUARC_PLOT_DIR keeps the figures for a look by eye.
	dir := os.Getenv("MUARC_PLOT_DIR")
	checkFigure(t, Overview(tr, &tr.Arrays[0], &tr.Arrays[0].Decompositions[0], ds), dir, "overview")
	checkFigure(t, RateThreshold([]Level{{Stats: ds, Label: "ramp_20 (20 % MVC)"}}), dir, "rates")
	checkFigure(t, MUAPGrid("ramp_20 grid auto", &tr.Arrays[0], tp), dir, "muaps")
}

func TestSaveByExtension(t *testing.T) {
	tr, ds, _ := fixture()
	f := Overview(tr, &tr.Arrays[0], &tr.Arrays[0].Decompositions[0], ds)
	dir := t.TempDir()
	if err := f.Save(filepath.Join(dir, "a.svg"), false); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(filepath.Join(dir, "a.svg"))
	if !strings.Contains(string(b), "<svg") {
		t.Errorf("a.svg holds no svg")
	}
	if err := f.Save(filepath.Join(dir, "a.svg"), false); err == nil {
		t.Errorf("second save without overwrite succeeded")
	}
	if err := f.Save(filepath.Join(dir, "a.gif"), false); err == nil {
		t.Errorf("unknown extension accepted")
	}
}
