package report

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"muarc/analysis/study"
	"muarc/recfile"
	"muarc/synth"
)

// studyFolder writes the generator's test study into a temporary folder,
// with one stray file that is not a recording.
func studyFolder(t *testing.T) string {
	t.Helper()
	gs, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "sub"), 0o755); err != nil {
		t.Fatal(err)
	}
	for i, g := range gs {
		name := filepath.Join(dir, "sub", "rec"+string(rune('a'+i))+".h5")
		if err := recfile.Write(name, g.Recording, recfile.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("lab notes"), 0o644)
	return dir
}

func TestBuildStudyReport(t *testing.T) {
	dir := studyFolder(t)
	calls := 0
	p, err := Build(dir, BuildOptions{Title: "Test study", Now: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC),
		Progress: func(done, total int) { calls++ }})
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Recordings) != 1 || calls != 1 {
		t.Fatalf("%d recordings, %d progress calls", len(p.Recordings), calls)
	}
	r := p.Recordings[0]
	// The test study: two trials x two arrays -> four index rows, four
	// overviews, two scatters (one per array), two MUAP grids (the higher
	// level's trial per array).
	if len(p.Index.Rows) != 4 {
		t.Errorf("index rows %d, want 4", len(p.Index.Rows))
	}
	kinds := map[string]int{}
	for _, f := range r.Figures {
		switch {
		case strings.HasPrefix(f.Caption, "Trial "):
			kinds["overview"]++
		case strings.HasPrefix(f.Caption, "Array "):
			kinds["rates"]++
		case strings.HasPrefix(f.Caption, "MUAP "):
			kinds["muaps"]++
		}
	}
	if kinds["overview"] != 4 || kinds["rates"] != 2 || kinds["muaps"] != 2 {
		t.Errorf("figures %v, want 4 overviews, 2 scatters, 2 MUAP grids", kinds)
	}
	if len(r.Stats.Rows) != 6 { // auto on both arrays, edited on the first, per trial
		t.Errorf("stats rows %d, want 6", len(r.Stats.Rows))
	}
	if len(p.Dictionary.Rows) < 20 {
		t.Errorf("data dictionary has %d rows", len(p.Dictionary.Rows))
	}
	if !strings.Contains(strings.Join(p.Notes, " "), "notes.txt") {
		t.Errorf("the stray file is not named in the notes: %q", p.Notes)
	}
	var b bytes.Buffer
	if err := Render(&b, p); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "report.html")
	os.WriteFile(out, b.Bytes(), 0o644)
	// Eight figures; the index, the stats, the derived-figures and the
	// dictionary tables at least.
	checkInChromium(t, out, 8, 4)
}

func TestBuildRefusesEmptyFolder(t *testing.T) {
	if _, err := Build(t.TempDir(), BuildOptions{}); err == nil || !strings.Contains(err.Error(), "no recordings") {
		t.Errorf("empty folder: %v", err)
	}
}

// A muscle with one subject shows its single line with n = 1 and says why
// there is no spread or mixed model; no cell reads "– ± –".
func TestStudyTableOneSubject(t *testing.T) {
	pts := [][]float64{{2, 5, 9, 14}, {20, 17.5, 14.5, 11}}
	line := study.FitLine(pts[0], pts[1])
	res := &study.Result{Summary: []study.SummaryRow{{Muscle: "soleus", LevelPct: 20, Relation: study.PlateauRate,
		Slope: study.SpreadOf([]float64{line.Slope}), Intercept: study.SpreadOf([]float64{line.Intercept}),
		Mixed: study.FitMixed([][]float64{pts[0]}, [][]float64{pts[1]})}}}
	tb := studyTable(res)
	row := strings.Join(tb.Rows[0], " | ")
	// Slope of the points by hand: Sxy / Sxx = -60.5 / 81 (a property of
	// the points given).
	want := fmtNum(-60.5/81, 3) + " (n = 1, no SD)"
	if !strings.Contains(row, want) || strings.Contains(row, "– ± –") || !strings.Contains(row, "needs 2 subjects, 1 here") {
		t.Errorf("row %q, want %q and the reason for no mixed model", row, want)
	}
}

// The files of a stats --write results folder are named once as that
// folder; other stray files are still listed one by one.
func TestResultsFolderApart(t *testing.T) {
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "results"), 0o755); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"results/" + study.JSONFile, "results/fig.png", "notes.txt"} {
		if err := os.WriteFile(filepath.Join(dir, filepath.FromSlash(f)), []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	rest, res := apartFromResults(dir, []string{"notes.txt", "results/" + study.JSONFile, "results/fig.png"})
	if strings.Join(rest, ",") != "notes.txt" || strings.Join(res, ",") != "results" {
		t.Errorf("rest %v, results %v", rest, res)
	}
}
