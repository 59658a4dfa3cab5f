package analysis

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
	"time"

	"muarc/record"
)

// trapezoidTrial builds a trial whose force and target follow the same
// trapezoid: rest 2 s, ramp up 5 s to levelPct, plateau 10 s, ramp down
// 5 s, rest 2 s; force in N with MVC 400 N, sampled at 100 Hz from startS.
func trapezoidTrial(levelPct, startS float64) record.Trial {
	const fs, mvc = 100.0, 400.0
	n := int(24 * fs)
	tgt := make([]float64, n)
	frc := make([]float64, n)
	for i := range tgt {
		t := float64(i) / fs
		var p float64
		switch {
		case t < 2:
		case t < 7:
			p = levelPct * (t - 2) / 5
		case t < 17:
			p = levelPct
		case t < 22:
			p = levelPct * (22 - t) / 5
		}
		tgt[i] = p
		frc[i] = p / 100 * mvc
	}
	return record.Trial{Name: "ramp", TargetPctMVC: levelPct, MVC: mvc, MVCUnit: "N",
		Force:       record.Signal{SamplingRateHz: fs, StartS: startS, Unit: "N", Values: frc},
		ForceTarget: record.Signal{SamplingRateHz: fs, StartS: startS, Unit: "%", Values: tgt}}
}

func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol {
		t.Errorf("%s = %.6g, want %.6g ± %g", what, got, want, tol)
	}
}

func TestSignalAtMapsTimes(t *testing.T) {
	s := record.Signal{SamplingRateHz: 10, StartS: 1.0, Values: []float64{0, 10, 20, 30}}
	// Sample i lies at 1.0 + i/10 s; 1.15 s is half way between samples 1 and 2.
	near(t, "at 1.15 s", SignalAt(s, 1.15), 15, 1e-9)
	near(t, "at 1.0 s", SignalAt(s, 1.0), 0, 1e-12)
	near(t, "at 1.3 s", SignalAt(s, 1.3), 30, 1e-9)
	if v := SignalAt(s, 0.9); !math.IsNaN(v) {
		t.Errorf("before the trace: %v, want NaN", v)
	}
	if v := SignalAt(s, 1.31); !math.IsNaN(v) {
		t.Errorf("after the trace: %v, want NaN", v)
	}
}

func TestFindPlateauOnTarget(t *testing.T) {
	tr := trapezoidTrial(30, 0.5)
	p, ok := FindPlateau(&tr)
	if !ok || p.From != "force_target" {
		t.Fatalf("plateau %+v ok=%v", p, ok)
	}
	// The target reaches 99 % of 30 % at 2 + 0.99*5 = 6.95 s after the
	// trace start and leaves it at 17 + 0.01*5 = 17.05 s; the trace starts
	// at 0.5 s. One sample (10 ms) of slack.
	near(t, "start", p.StartS, 0.5+6.95, 0.011)
	near(t, "end", p.EndS, 0.5+17.05, 0.011)
	near(t, "level", p.LevelPctMVC, 30, 0.1)
	// Force equals the target here (in N, 400 N MVC): held exactly.
	near(t, "force mean", p.ForceMeanPctMVC, 30, 0.1)
	near(t, "tracking RMS", p.TrackingRMSPctMVC, 0, 1e-9)

	tr.ForceTarget = record.Signal{}
	p, ok = FindPlateau(&tr)
	if !ok || p.From != "force" {
		t.Fatalf("force plateau %+v ok=%v", p, ok)
	}
	// Force within 10 % of its peak: 2 + 0.9*5 = 6.5 s to 17.5 s, widened by
	// less than the 0.25 s half smoothing window at the corners.
	near(t, "force start", p.StartS, 0.5+6.5, 0.25)
	near(t, "force end", p.EndS, 0.5+17.5, 0.25)
}

// steadyTrain returns discharge sample indices at rateHz from t0 to t1
// (seconds of array time) for an array sampled at fs.
func steadyTrain(t0, t1, ratePPS, fs float64) []int64 {
	var d []int64
	for t := t0; t < t1; t += 1 / ratePPS {
		d = append(d, int64(math.Round(t*fs)))
	}
	return d
}

func TestDecompositionThresholdsAndRates(t *testing.T) {
	tr := trapezoidTrial(40, 0.25)
	const fs = 2000.0
	// The array starts 0.75 s after the trial start, so a discharge at
	// array time ta lies at trial time ta + 0.75 and at force-trace time
	// ta + 0.75 - 0.25 = ta + 0.5.
	arr := record.Array{Name: "grid", SamplingRateHz: fs, StartS: 0.75}
	u := record.NewUnit(7)
	// First discharge at array time 3.5 s: force-trace time 4.0 s, i.e.
	// 2 s into the ramp up: 40 % * 2/5 = 16 % MVC = 64 N. Then 10 pps until
	// array time 18 s (trace time 18.5 s: 1.5 s into the ramp down: 40 % *
	// 3.5/5 = 28 % MVC).
	u.Discharges = steadyTrain(3.5, 18.0001, 10, fs)
	arr.Decompositions = []record.Decomposition{{Name: "auto", Units: []record.Unit{u}}}
	tr.Arrays = []record.Array{arr}
	ds := Decomposition(&tr, &tr.Arrays[0], &tr.Arrays[0].Decompositions[0])
	if len(ds.Units) != 1 {
		t.Fatalf("units %d", len(ds.Units))
	}
	s := ds.Units[0]
	near(t, "first discharge s", s.FirstS, 4.25, 1e-9)
	near(t, "recruit % MVC", s.RecruitPctMVC, 16, 1e-6)
	near(t, "recruit N", s.RecruitForce, 64, 1e-6)
	near(t, "derecruit % MVC", s.DerecruitPctMVC, 28, 1e-6)
	if ds.ForceUnit != "N" {
		t.Errorf("force unit %q", ds.ForceUnit)
	}
	near(t, "initial rate", s.InitialRatePPS, 10, 1e-9)
	near(t, "plateau rate", s.PlateauRatePPS, 10, 1e-9)
	near(t, "plateau ISI CoV", s.PlateauISICoV, 0, 1e-9)
	// Plateau 0.25+6.95 .. 0.25+17.05 s in trial time = array time 6.45 ..
	// 16.55 s: discharges at 6.5, 6.6, ... 16.5 -> 100 intervals.
	if s.PlateauISIs != 100 {
		t.Errorf("plateau intervals %d, want 100", s.PlateauISIs)
	}
}

func TestInitialRateRule(t *testing.T) {
	tr := trapezoidTrial(20, 0)
	arr := record.Array{Name: "g", SamplingRateHz: 1000}
	u := record.NewUnit(1)
	// ISIs 125, 100, 80, 50 ms: the first three span 305 ms, so the
	// initial rate is 3 / 0.305 s = 9.8360... pps.
	u.Discharges = []int64{5000, 5125, 5225, 5305, 5355}
	short := record.NewUnit(2)
	short.Discharges = []int64{5000, 5100, 5200}
	arr.Decompositions = []record.Decomposition{{Name: "d", Units: []record.Unit{u, short}}}
	ds := Decomposition(&tr, &arr, &arr.Decompositions[0])
	near(t, "initial rate", ds.Units[0].InitialRatePPS, 3/0.305, 1e-9)
	if !math.IsNaN(ds.Units[1].InitialRatePPS) {
		t.Errorf("two intervals give initial rate %v, want NaN (rule needs three)", ds.Units[1].InitialRatePPS)
	}
}

func TestSmoothedRateSteadyTrain(t *testing.T) {
	var times []float64
	for k := 0; k < 200; k++ {
		times = append(times, 1+float64(k)/20)
	}
	r := SmoothedRatePPS(times, 0, 12, 0.01, SmoothedRateWindowS)
	// A unit-area Hann window 0.4 s long over a steady 20 pps train (8
	// impulses per window) gives 20 pps away from the ends: the sum of
	// (1 + cos(2π(u+k/20)/0.4))/0.4 over the 8 impulses is 8/0.4 = 20, the
	// cosines cancelling over a whole period (common practice for smoothed
	// rates; the identity is the sum of the 8th roots of unity).
	for _, ts := range []float64{3, 5.02, 8.503} {
		near(t, "smoothed rate", r[int(math.Round(ts/0.01))], 20, 1e-9)
	}
	near(t, "before the train", r[50], 0, 1e-12)
}

func TestStoreDerivedKeepsTheLabsFigures(t *testing.T) {
	tr := trapezoidTrial(40, 0)
	arr := record.Array{Name: "grid", SamplingRateHz: 2000}
	u := record.NewUnit(3)
	u.Discharges = steadyTrain(4, 18, 12.5, 2000)
	u.MeanRatePPS, u.RecruitPctMVC = 12.3, 15.9 // the lab's own figures
	arr.Decompositions = []record.Decomposition{{Name: "auto", Units: []record.Unit{u}}, {Name: "empty"}}
	tr.Arrays = []record.Array{arr}
	rec := &record.Recording{Trials: []record.Trial{tr}}
	st := Recording(rec)
	if _, err := StoreDerived(rec, st, nil, time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC)); err != nil {
		t.Fatal(err)
	}
	got := rec.Trials[0].Arrays[0].Decompositions[0]
	if got.Units[0].MeanRatePPS != 12.3 || got.Units[0].RecruitPctMVC != 15.9 || len(got.ExtraColumns) != 0 {
		t.Errorf("the lab's unit table changed: %+v, extra %v", got.Units[0], got.ExtraColumns)
	}
	d := got.Derived
	if d == nil || len(d.Units) != 1 || d.Units[0].ID != 3 || d.ForceUnit != "N" {
		t.Fatalf("derived %+v", d)
	}
	near(t, "derived recruit", d.Units[0].RecruitPctMVC, 16, 1e-6)
	near(t, "derived plateau rate", d.Units[0].PlateauRatePPS, 12.5, 1e-6)
	near(t, "derived recruit force", d.Units[0].RecruitForce, 64, 1e-6)
	if !json.Valid([]byte(d.Method)) || !strings.Contains(d.Method, "plateau_rate") {
		t.Errorf("method %q", d.Method)
	}
	if e := rec.Trials[0].Arrays[0].Decompositions[1].Derived; e == nil || len(e.Units) != 0 {
		t.Errorf("the empty decomposition's derived figures: %+v", e)
	}
	if h := rec.Provenance.History; len(h) != 1 || h[0].Action != "stats" {
		t.Errorf("history %+v", h)
	}
}
