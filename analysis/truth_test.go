package analysis

import (
	"encoding/json"
	"math"
	"os/exec"
	"strings"
	"testing"

	"muarc/record"
	"muarc/synth"
)

// Tolerances below are a property of our model (package synth), not
// outside values: its truth gives the steady-state force at the excitation
// where a unit starts and stops, while the measured force lags the
// excitation (twitch summation), so the force at the first discharge reads
// lower and at the last discharge higher than the truth; rates rise during
// the first three intervals on the ramp (TestConfig's ramps are steep, 20 %
// MVC/s at 40 %, and rates rise 0.8 pps per % excitation), so the initial
// rate reads a little above the model's rate at recruitment.
var truthBands = struct {
	recruitLo, recruitHi     float64 // measured - truth, % MVC
	derecruitLo, derecruitHi float64 // measured - truth, % MVC
	initialLo, initialHi     float64 // measured - truth, pps
	plateauRel               float64 // |measured/truth - 1|
	plateauRelMean           float64 // mean |measured/truth - 1|
	cov                      float64 // |measured - truth|
}{-4, 1, -1, 8.5, -1, 4, 0.08, 0.03, 0.06}

type truthCase struct {
	tr   *record.Trial
	arr  *record.Array
	dec  *record.Decomposition
	auto bool
	ut   []synth.UnitTruth
	// idx[k] is the index in dec.Units of truth unit k, or -1.
	idx []int
}

func truthCases(t *testing.T) []truthCase {
	gs, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	var out []truthCase
	for _, g := range gs {
		for ti, tt := range g.Truth.Trials {
			tr := &g.Recording.Trials[ti]
			for ai, at := range tt.Arrays {
				arr := &tr.Arrays[ai]
				// The true trains as a decomposition of their own: this
				// checks our estimators apart from detection errors.
				truth := &record.Decomposition{Name: "truth"}
				var idx []int
				for k, ut := range at.Units {
					u := record.NewUnit(int64(ut.Pool))
					u.Discharges = ut.Discharges
					truth.Units = append(truth.Units, u)
					idx = append(idx, k)
				}
				out = append(out, truthCase{tr, arr, truth, false, at.Units, idx})
				auto := &arr.Decompositions[0]
				idx = nil
				for _, ut := range at.Units {
					j := -1
					for i, u := range auto.Units {
						if ut.AutoID != 0 && u.ID == ut.AutoID {
							j = i
						}
					}
					idx = append(idx, j)
				}
				out = append(out, truthCase{tr, arr, auto, true, at.Units, idx})
			}
		}
	}
	return out
}

func TestFiguresRecoverGroundTruth(t *testing.T) {
	b := truthBands
	checked := 0
	for _, c := range truthCases(t) {
		ds := Decomposition(c.tr, c.arr, c.dec)
		slack := 0.0
		if c.auto {
			// Missed and spurious discharges of the "auto" decomposition
			// widen each band a little (a property of our model's error
			// rates).
			slack = 1
		}
		var rel []float64
		for k, ut := range c.ut {
			if c.idx[k] < 0 {
				continue
			}
			u := ds.Units[c.idx[k]]
			where := c.tr.Name + "/" + c.arr.Name + "/" + c.dec.Name
			in := func(what string, d, lo, hi float64) {
				if math.IsNaN(d) || d < lo || d > hi {
					t.Errorf("%s unit %d: %s measured - truth = %.3f, outside [%g, %g]", where, ut.Pool, what, d, lo, hi)
				}
			}
			in("recruit % MVC", u.RecruitPctMVC-ut.RecruitPctMVC, b.recruitLo-slack, b.recruitHi+slack)
			in("derecruit % MVC", u.DerecruitPctMVC-ut.DerecruitPctMVC, b.derecruitLo-slack, b.derecruitHi+slack)
			in("initial rate pps", u.InitialRatePPS-ut.InitialRatePPS, b.initialLo-slack, b.initialHi+slack)
			in("plateau rate rel", u.PlateauRatePPS/ut.PlateauRatePPS-1, -b.plateauRel-slack*0.02, b.plateauRel+slack*0.02)
			in("ISI CoV", u.PlateauISICoV-ut.ISICoV, -b.cov-slack*0.06, b.cov+slack*0.06)
			rel = append(rel, math.Abs(u.PlateauRatePPS/ut.PlateauRatePPS-1))
			checked++
		}
		if m, _ := meanStd(rel); m > b.plateauRelMean+slack*0.01 {
			t.Errorf("%s/%s/%s: mean |plateau rate error| %.3f", c.tr.Name, c.arr.Name, c.dec.Name, m)
		}
		// The model's units recruited earlier fire faster on the plateau:
		// the fitted slope is negative (a property of our model).
		if c.tr.TargetPctMVC >= 30 && !(ds.PlateauRateFit.Slope < 0 && ds.PlateauRateFit.N >= 8) {
			t.Errorf("%s/%s: plateau rate fit %+v, want a negative slope over 8+ units", c.tr.Name, c.dec.Name, ds.PlateauRateFit)
		}
	}
	if checked < 40 {
		t.Errorf("only %d units checked", checked)
	}
}

// TestRegressionOnGeneratedPointsAgainstNumPy fits the generator's
// rate-versus-threshold points and compares with numpy.polyfit (deg 1) and
// numpy.corrcoef squared (Debian python3-numpy) on the same points.
func TestRegressionOnGeneratedPointsAgainstNumPy(t *testing.T) {
	py := needPython(t, "numpy")
	for _, c := range truthCases(t) {
		if c.auto || c.tr.TargetPctMVC < 30 {
			continue
		}
		ds := Decomposition(c.tr, c.arr, c.dec)
		var x, y []float64
		for _, u := range ds.Units {
			if finite(u.RecruitPctMVC) && finite(u.PlateauRatePPS) {
				x, y = append(x, u.RecruitPctMVC), append(y, u.PlateauRatePPS)
			}
		}
		in, _ := json.Marshal(map[string]any{"x": x, "y": y})
		cmd := exec.Command(py, "-c", `
import json, sys, numpy
d = json.load(sys.stdin)
p = numpy.polyfit(d["x"], d["y"], 1)
r = numpy.corrcoef(d["x"], d["y"])[0, 1]
print(json.dumps([p[0], p[1], r * r, len(d["x"])]))`)
		cmd.Stdin = strings.NewReader(string(in))
		out, err := cmd.Output()
		if err != nil {
			t.Fatalf("python: %v", err)
		}
		var ref [4]float64
		if err := json.Unmarshal(out, &ref); err != nil {
			t.Fatal(err)
		}
		f := ds.PlateauRateFit
		if f.N != int(ref[3]) {
			t.Errorf("n %d, numpy %v", f.N, ref[3])
		}
		near(t, "slope vs numpy.polyfit", f.Slope, ref[0], 1e-9)
		near(t, "intercept vs numpy.polyfit", f.Intercept, ref[1], 1e-8)
		near(t, "R^2 vs numpy.corrcoef^2", f.R2, ref[2], 1e-9)
	}
}

// TestTemplatesMatchTheModelsMUAPs compares spike-triggered averages of the
// generated EMG with the true templates the generator attaches to the
// "auto" decomposition: for units with a clear MUAP the shapes correlate
// (a property of our model at its 20 dB SNR).
func TestTemplatesMatchTheModelsMUAPs(t *testing.T) {
	gs, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	arr := &gs[0].Recording.Trials[1].Arrays[0]
	dec := &arr.Decompositions[0]
	ref := dec.MUAPs
	if ref == nil {
		t.Fatal("generator gave no true templates")
	}
	ts, err := ArrayTemplates(arr, MUAPHalfWindowS)
	if err != nil {
		t.Fatal(err)
	}
	got := ts[0]
	good := 0
	for u := range dec.Units {
		var sxy, sxx, syy float64
		for c := 0; c < ref.Channels; c++ {
			for l := 0; l < ref.Lags; l++ {
				lag := ref.FirstLag + l
				gl := lag - got.MUAPs.FirstLag
				if gl < 0 || gl >= got.MUAPs.Lags {
					continue
				}
				x, y := float64(ref.At(u, c, l)), float64(got.MUAPs.At(u, c, gl))
				sxy, sxx, syy = sxy+x*y, sxx+x*x, syy+y*y
			}
		}
		r := sxy / math.Sqrt(sxx*syy)
		if r > 0.9 {
			good++
		}
		t.Logf("unit %d: r %.3f averaged %d", dec.Units[u].ID, r, got.Averaged[u])
	}
	if good < len(dec.Units)*3/4 {
		t.Errorf("%d of %d templates correlate above 0.9 with the model's", good, len(dec.Units))
	}
}
