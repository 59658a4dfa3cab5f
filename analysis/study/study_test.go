package study

import (
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/internal/reftest"
	"muarc/recfile"
	"muarc/synth"
)

// writeStudy writes the demo study with 2 x 2 grids (same pools, trials and
// ramps as the demo) into a folder.
func writeStudy(t *testing.T) string {
	cfg := synth.DemoConfig()
	for i := range cfg.Arrays {
		cfg.Arrays[i].Rows, cfg.Arrays[i].Columns, cfg.Arrays[i].SkipCorner, cfg.Arrays[i].BadChannel = 2, 2, false, -1
	}
	cfg.MUAPs = false
	gs, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for i, g := range gs {
		if err := recfile.Write(filepath.Join(dir, fmt.Sprintf("s%d.h5", i+1)), g.Recording, recfile.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

func TestStudyAnalysis(t *testing.T) {
	dir := writeStudy(t)
	res, err := Analyse(dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	// 3 subjects x 2 arrays x 3 levels x 2 relations.
	if len(res.Rows) != 36 || len(res.Sources) != 3 {
		t.Fatalf("%d rows from %d sources", len(res.Rows), len(res.Sources))
	}
	for _, r := range res.Rows {
		// Each row's fit is FitLine over its own points.
		var x, y []float64
		for _, p := range r.Points {
			x, y = append(x, p[0]), append(y, p[1])
		}
		if f := FitLine(x, y); f != r.Fit {
			t.Errorf("%s %s %g %s: fit %+v, refit %+v", r.Subject, r.Muscle, r.LevelPct, r.Relation, r.Fit, f)
		}
		// A property of our model: plateau rate falls with threshold, with
		// a high R^2, at every level; thresholds from near 0 to near the
		// target.
		if r.Relation == PlateauRate && !(r.Fit.Slope < 0 && r.Fit.R2 > 0.6 && r.Units >= 6) {
			t.Errorf("%s %s %g: plateau fit %+v over %d units", r.Subject, r.Muscle, r.LevelPct, r.Fit, r.Units)
		}
		if !(r.ThresholdMinPct < 3 && r.ThresholdMaxPct > 0.6*r.LevelPct) {
			t.Errorf("%s %s %g: thresholds %.2f-%.2f", r.Subject, r.Muscle, r.LevelPct, r.ThresholdMinPct, r.ThresholdMaxPct)
		}
		if !(r.Fit.SlopeCILow < r.Fit.Slope && r.Fit.Slope < r.Fit.SlopeCIHigh) {
			t.Errorf("slope %v outside its interval %v..%v", r.Fit.Slope, r.Fit.SlopeCILow, r.Fit.SlopeCIHigh)
		}
	}
	// Tibialis anterior is on every subject: per level and pooled rows for
	// both relations, the mixed model fitted over 3 subjects.
	ta := 0
	for _, s := range res.Summary {
		if s.Muscle != "tibialis anterior" {
			continue
		}
		ta++
		lines := 3 // subjects; pooled over the 3 levels, 9 subject-level lines
		if s.AllLevels {
			lines = 9
		}
		if s.Slope.N != lines || s.Mixed.Subjects != 3 || math.IsNaN(s.Mixed.Slope) || !(s.Mixed.WithinVar > 0) {
			t.Errorf("summary %+v", s)
		}
		if s.Relation == PlateauRate && !(s.Mixed.Slope < 0) {
			t.Errorf("mixed plateau slope %v", s.Mixed.Slope)
		}
	}
	// Over all levels each level has its own fixed intercept: the
	// within-subject variance stays of the order of the per-level ones
	// instead of taking up the rise of rate with level (a property of our
	// model: plateau rates rise with the level, R^2 > 0.6 within a level).
	for _, rel := range Relations {
		var perLevel float64
		var all *SummaryRow
		for i, s := range res.Summary {
			if s.Muscle != "tibialis anterior" || s.Relation != rel {
				continue
			}
			if s.AllLevels {
				all = &res.Summary[i]
			} else {
				perLevel = math.Max(perLevel, s.Mixed.WithinVar)
			}
		}
		if all == nil || !(all.Mixed.WithinVar < 2*perLevel) || len(all.Mixed.Levels) != 3 || !math.IsNaN(all.Mixed.Intercept) {
			t.Errorf("%s over all levels: within variance %v (largest per level %v), level intercepts %+v", rel, all.Mixed.WithinVar, perLevel, all.Mixed.Levels)
		}
		if rel == PlateauRate && !(all.Mixed.Levels[0].Intercept < all.Mixed.Levels[1].Intercept && all.Mixed.Levels[1].Intercept < all.Mixed.Levels[2].Intercept) {
			t.Errorf("plateau rate intercepts do not rise with the level: %+v", all.Mixed.Levels)
		}
	}
	if ta != 8 {
		t.Errorf("%d tibialis anterior summary rows, want 8 (3 levels + all, 2 relations)", ta)
	}
	out := filepath.Join(t.TempDir(), "results")
	if err := Save(out, res); err != nil {
		t.Fatal(err)
	}
	// pandas (Debian python3-pandas) reads the tidy tables and the JSON.
	py := reftest.NeedPython(t, "pandas")
	b, err := exec.Command(py, "-c", `
import sys, json, pandas as pd
f = pd.read_csv(sys.argv[1] + "/`+FitsFile+`", sep="\t")
s = pd.read_csv(sys.argv[1] + "/`+SummaryFile+`", sep="\t")
j = json.load(open(sys.argv[1] + "/`+JSONFile+`"))
print(f.shape[0], f.shape[1], s.shape[0], len(j["sources"]), len(j["sources"][0]["sha256"]), f["slope_pps_per_pct_mvc"].notna().sum())
`, out).CombinedOutput()
	if err != nil {
		t.Fatalf("pandas: %v %s", err, b)
	}
	want := fmt.Sprintf("36 %d %d 3 64 36", len(FitColumns), len(res.Summary))
	if got := strings.TrimSpace(string(b)); got != want {
		t.Errorf("pandas read %q, want %q", got, want)
	}
	if _, err := os.Stat(filepath.Join(dir, "s1.h5")); err != nil {
		t.Error(err)
	}
}
