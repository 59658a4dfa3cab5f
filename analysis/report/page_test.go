package report

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"muarc/analysis"
	"muarc/analysis/plot"
)

func samplePage(t *testing.T) *Page {
	ds := &analysis.DecompositionStats{Trial: "ramp_30", Array: "grid", Decomposition: "auto"}
	for k := 0; k < 8; k++ {
		th := 2 + 3.5*float64(k)
		ds.Units = append(ds.Units, analysis.UnitStats{ID: int64(k + 1), RecruitPctMVC: th,
			PlateauRatePPS: 25 - 0.4*th + math.Sin(float64(k)), InitialRatePPS: 8 + 0.05*th})
	}
	x, yp, yi := []float64{}, []float64{}, []float64{}
	for _, u := range ds.Units {
		x, yp, yi = append(x, u.RecruitPctMVC), append(yp, u.PlateauRatePPS), append(yi, u.InitialRatePPS)
	}
	ds.PlateauRateFit, ds.InitialRateFit = analysis.LinearFit(x, yp), analysis.LinearFit(x, yi)
	var svg bytes.Buffer
	if err := plot.RateThreshold([]plot.Level{{Stats: ds, Label: "ramp_30"}}).WriteSVG(&svg); err != nil {
		t.Fatal(err)
	}
	return &Page{Title: "Study report <test>", Generated: "2026-03-14T10:00:00Z", Software: "muarc test", Folder: "study",
		Index: Table{Caption: "Index", Columns: []string{"file", "units"}, Rows: [][]string{{"a.h5", "8"}, {"b.h5", "5"}}},
		Recordings: []Section{{File: "a.h5", Status: "valid", Class: "ok",
			Validation: Table{Caption: "Validation", Empty: "no findings"},
			Stats:      Table{Caption: "Figures", Columns: []string{"trial", "slope"}, Rows: [][]string{{"ramp_30", "-0.40"}}},
			Figures:    []Figure{{Caption: "rates", SVG: svg.Bytes()}}}},
		Derived:    Table{Columns: []string{"figure", "rule"}, Rows: [][]string{{"initial rate", "3 ISIs"}}},
		Dictionary: Table{Empty: "none"}}
}

func TestRenderEscapesAndInlines(t *testing.T) {
	p := samplePage(t)
	var b bytes.Buffer
	if err := Render(&b, p); err != nil {
		t.Fatal(err)
	}
	s := b.String()
	if !strings.Contains(s, "Study report &lt;test&gt;") {
		t.Errorf("title not escaped")
	}
	if strings.Contains(s, "<?xml") || strings.Count(s, "<svg") != 1 {
		t.Errorf("SVG not inlined cleanly: %d <svg, prolog %v", strings.Count(s, "<svg"), strings.Contains(s, "<?xml"))
	}
	// Self-contained: nothing to fetch (no src=, no stylesheet links, no
	// http URLs apart from the SVG namespace names).
	for _, bad := range []string{"src=", "<link", "@import", "url("} {
		if strings.Contains(s, bad) {
			t.Errorf("page refers to an outside resource: %q", bad)
		}
	}
	if n := strings.Count(strings.ReplaceAll(strings.ReplaceAll(s, "http://www.w3.org/2000/svg", ""), "http://www.w3.org/1999/xlink", ""), "http"); n != 0 {
		t.Errorf("page holds %d other http references", n)
	}
}

func TestRenderedPageInChromium(t *testing.T) {
	p := samplePage(t)
	dir := t.TempDir()
	path := filepath.Join(dir, "report.html")
	var b bytes.Buffer
	if err := Render(&b, p); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(path, b.Bytes(), 0o644)
	// One figure; the index, the stats and the derived-figures tables.
	checkInChromium(t, path, 1, 3)
}
