package validate

import (
	"math"
	"strings"
	"testing"

	"muarc/record"
)

// goodRecording is a small, valid recording: one trial, one 4 x 2 array at
// 2048 Hz for 2 s, force at 2048 Hz, one decomposition of three units firing
// at 12 pps with good quality figures. Every check passes on it.
func goodRecording() *record.Recording {
	const fs, rows, nch = 2048.0, 4096, 8
	samples := &record.MemSamples{Samples: rows, Channels: nch, F32: make([]float32, rows*nch)}
	for i := range samples.F32 {
		samples.F32[i] = float32(math.Sin(float64(i) * 0.01))
	}
	var chans []record.Channel
	for r := 0; r < 4; r++ {
		for c := 0; c < 2; c++ {
			chans = append(chans, record.Channel{Label: "e" + string(rune('1'+r*2+c)), Row: r, Column: c, XMm: float64(c) * 8, YMm: float64(r) * 8, Usable: true})
		}
	}
	var units []record.Unit
	for k := 0; k < 3; k++ {
		u := record.NewUnit(int64(k + 1))
		for t := 100 + 20*k; t < rows; t += 170 { // 170 samples = 12.0 pps at 2048 Hz
			u.Discharges = append(u.Discharges, int64(t))
		}
		u.Silhouette, u.PNRdB, u.AccuracyPct = 0.95, 35, 92
		units = append(units, u)
	}
	force := make([]float64, rows)
	for i := range force {
		force[i] = 40 * float64(i) / rows
	}
	return &record.Recording{
		Software: "muarc test",
		Study:    record.Study{ID: "st1", Title: "checks"},
		Subject:  record.Subject{ID: "S01", AgeYears: math.NaN(), HeightCm: math.NaN(), MassKg: math.NaN(), Sex: "other"},
		Session:  record.Session{ID: "v1", Date: "2026-01-02"},
		Trials: []record.Trial{{
			Name: "ramp_10", Task: "isometric", TargetPctMVC: 10, MVC: 400, MVCUnit: "N",
			Profile: record.ForceProfile{Shape: "trapezoid", RestS: 0.5, RampUpS: 0.5, PlateauS: 0.5, RampDownS: 0.5},
			Force:   record.Signal{SamplingRateHz: fs, Unit: "N", Values: force},
			Arrays: []record.Array{{
				Name: "grid_a", Muscle: "tibialis anterior", Side: "left", Rows: 4, Columns: 2, IEDMm: 8,
				Gain: 100, ADCBits: 16, FilterLowHz: 10, FilterHighHz: 500, Montage: "monopolar", Reference: "strap",
				SamplingRateHz: fs, Unit: "uV", Channels: chans, Samples: samples,
				Decompositions: []record.Decomposition{{Name: "auto", Method: "test", MethodVersion: "1", Parameters: "{}", Units: units}},
			}},
		}},
	}
}

func unitOf(r *record.Recording, k int) *record.Unit {
	return &r.Trials[0].Arrays[0].Decompositions[0].Units[k]
}

// contentBreaks each break exactly one rule of goodRecording and name the
// finding expected. Thresholds are the defaults (see DefaultRules for where
// each comes from).
var contentBreaks = []struct {
	name  string
	check string
	sev   Severity
	path  string // expected JSONPath
	brk   func(r *record.Recording)
}{
	{"discharges out of order", "discharge.sorted", Error, "/trials/0/arrays/0/decompositions/0/units/1/discharges", func(r *record.Recording) {
		d := unitOf(r, 1).Discharges
		d[3], d[4] = d[4], d[3]
	}},
	{"discharge twice", "discharge.duplicate", Error, "/trials/0/arrays/0/decompositions/0/units/0/discharges", func(r *record.Recording) {
		u := unitOf(r, 0)
		u.Discharges = append(u.Discharges[:5:5], append([]int64{u.Discharges[4]}, u.Discharges[5:]...)...)
	}},
	{"discharge past the end", "discharge.range", Error, "/trials/0/arrays/0/decompositions/0/units/2/discharges", func(r *record.Recording) {
		u := unitOf(r, 2)
		u.Discharges = append(u.Discharges, 4096) // rows are 0..4095
	}},
	{"negative discharge", "discharge.range", Error, "/trials/0/arrays/0/decompositions/0/units/0/discharges", func(r *record.Recording) {
		u := unitOf(r, 0)
		u.Discharges = append([]int64{-1}, u.Discharges...)
	}},
	{"empty decomposition", "decomposition.empty", Note, "/trials/0/arrays/0/decompositions/0/units", func(r *record.Recording) {
		d := &r.Trials[0].Arrays[0].Decompositions[0]
		d.Units, d.MUAPs, d.ExtraColumns = nil, nil, nil
	}},
	{"doublet", "discharge.doublet", Note, "/trials/0/arrays/0/decompositions/0/units/0/discharges", func(r *record.Recording) {
		u := unitOf(r, 0)
		// 20 samples at 2048 Hz = 9.8 ms, under the 20 ms doublet gate.
		u.Discharges = append(u.Discharges[:3:3], append([]int64{u.Discharges[2] + 20}, u.Discharges[3:]...)...)
	}},
	{"sustained high rate", "discharge.rate_high", Warning, "/trials/0/arrays/0/decompositions/0/units/1/discharges", func(r *record.Recording) {
		u := unitOf(r, 1)
		// 40 samples at 2048 Hz: 51.2 pps over every run of intervals,
		// above 50 pps. 19.5 ms is also a doublet; the test switches the
		// doublet check off for this case.
		var ds []int64
		for i := 0; i < 12; i++ {
			ds = append(ds, int64(1000+40*i))
		}
		u.Discharges = ds
	}},
	{"too few discharges", "discharge.few", Warning, "/trials/0/arrays/0/decompositions/0/units/2/discharge_count", func(r *record.Recording) {
		u := unitOf(r, 2)
		u.Discharges = u.Discharges[:9] // fewer than 10
	}},
	{"low silhouette", "quality.silhouette", Warning, "/trials/0/arrays/0/decompositions/0/units/0/silhouette", func(r *record.Recording) {
		unitOf(r, 0).Silhouette = 0.89
	}},
	{"low PNR", "quality.pnr", Warning, "/trials/0/arrays/0/decompositions/0/units/1/pnr_db", func(r *record.Recording) {
		unitOf(r, 1).PNRdB = 29.9
	}},
	{"duplicate unit id", "units.id_unique", Error, "/trials/0/arrays/0/decompositions/0/units/2/id", func(r *record.Recording) {
		unitOf(r, 2).ID = 1
	}},
	{"EMG at 512 Hz", "emg.rate_low", Warning, "/trials/0/arrays/0/sampling_rate_hz", func(r *record.Recording) {
		r.Trials[0].Arrays[0].SamplingRateHz = 512
		// keep the discharges' intervals above the doublet gate at 512 Hz
		for k := range r.Trials[0].Arrays[0].Decompositions[0].Units {
			u := unitOf(r, k)
			for i := range u.Discharges {
				u.Discharges[i] = int64(10 + 45*i + k)
			}
		}
	}},
	{"EMG rate zero", "rate.positive", Error, "/trials/0/arrays/0/sampling_rate_hz", func(r *record.Recording) {
		r.Trials[0].Arrays[0].SamplingRateHz = 0
	}},
	{"force rate negative", "rate.positive", Error, "/trials/0/force/sampling_rate_hz", func(r *record.Recording) {
		r.Trials[0].Force.SamplingRateHz = -1
	}},
	{"force unit unknown", "force.unit", Warning, "/trials/0/force/unit", func(r *record.Recording) {
		r.Trials[0].Force.Unit = "newtons"
	}},
	{"force unit missing", "force.unit_missing", Note, "/trials/0/force/unit", func(r *record.Recording) {
		r.Trials[0].Force.Unit = ""
	}},
	{"MVC unit unknown", "force.unit", Warning, "/trials/0/mvc_unit", func(r *record.Recording) {
		r.Trials[0].MVCUnit = "lbs"
	}},
	{"MVC zero", "trial.mvc", Error, "/trials/0/mvc", func(r *record.Recording) { r.Trials[0].MVC = 0 }},
	{"MVC negative", "trial.mvc", Error, "/trials/0/mvc", func(r *record.Recording) { r.Trials[0].MVC = -3 }},
	{"target above 100", "trial.target_high", Warning, "/trials/0/target_pct_mvc", func(r *record.Recording) { r.Trials[0].TargetPctMVC = 110 }},
	{"target below 0", "trial.target_negative", Error, "/trials/0/target_pct_mvc", func(r *record.Recording) { r.Trials[0].TargetPctMVC = -1 }},
	{"force target length differs", "force.length", Error, "/trials/0/force_target", func(r *record.Recording) {
		r.Trials[0].ForceTarget = record.Signal{SamplingRateHz: 2048, Unit: "%", Values: make([]float64, 100)}
	}},
	{"two channels on one electrode", "channels.grid_duplicate", Error, "/trials/0/arrays/0/channels/3", func(r *record.Recording) {
		r.Trials[0].Arrays[0].Channels[3].Row, r.Trials[0].Arrays[0].Channels[3].Column = 1, 0
	}},
	{"channel outside the grid", "channels.grid_outside", Error, "/trials/0/arrays/0/channels/7", func(r *record.Recording) {
		r.Trials[0].Arrays[0].Channels[7].Column = 2 // columns are 0..1
	}},
	{"channel table short", "channels.count", Error, "/trials/0/arrays/0/channels", func(r *record.Recording) {
		a := &r.Trials[0].Arrays[0]
		a.Channels = a.Channels[:7]
	}},
	{"two trials one name", "names.unique", Error, "/trials/1/name", func(r *record.Recording) {
		t := r.Trials[0]
		t.Arrays = nil
		r.Trials = append(r.Trials, t)
	}},
	{"extra column short", "units.column_length", Error, "/trials/0/arrays/0/decompositions/0/units", func(r *record.Recording) {
		d := &r.Trials[0].Arrays[0].Decompositions[0]
		d.ExtraColumns = []record.Column{{Name: "area", Values: []float64{1, 2}}}
	}},
	{"MUAPs for too few units", "muaps.shape", Error, "/trials/0/arrays/0/decompositions/0/muaps", func(r *record.Recording) {
		d := &r.Trials[0].Arrays[0].Decompositions[0]
		d.MUAPs = &record.MUAPs{Units: 2, Channels: 8, Lags: 3, Unit: "uV", Data: make([]float32, 2*8*3)}
	}},
}

func TestGoodRecordingHasNoFindings(t *testing.T) {
	if fs := CheckRecording(goodRecording(), DefaultRules()); len(fs) != 0 {
		t.Fatalf("good recording: %v", fs)
	}
}

func TestContentBreaks(t *testing.T) {
	rules := DefaultRules()
	rules.Disabled = []string{"discharge.doublet"} // see the sustained-rate case
	for _, c := range contentBreaks {
		t.Run(c.name, func(t *testing.T) {
			rec := goodRecording()
			c.brk(rec)
			r := DefaultRules()
			if c.check == "discharge.rate_high" {
				r = rules
			}
			fs := finish(CheckRecording(rec, r), Options{Rules: r})
			if len(fs) != 1 {
				t.Fatalf("want exactly one finding %s, got %d: %v", c.check, len(fs), fs)
			}
			f := fs[0]
			if f.Check != c.check || f.Severity != c.sev || f.JSONPath != c.path {
				t.Fatalf("got %s %s at %s, want %s %s at %s (%s)", f.Severity, f.Check, f.JSONPath, c.sev, c.check, c.path, f.Message)
			}
			if f.HDF5Path == "" || !strings.HasPrefix(f.HDF5Path, "/trials/ramp_10") || f.Message == "" || f.Hint == "" {
				t.Fatalf("finding lacks where or what: %+v", f)
			}
		})
	}
}

// TestDoubletInterval checks the interval arithmetic: 20 samples at 2048 Hz
// are 20/2048 s = 9.765625 ms.
func TestDoubletInterval(t *testing.T) {
	rec := goodRecording()
	u := unitOf(rec, 0)
	u.Discharges = []int64{0, 20, 400, 800, 1200, 1600, 2000, 2400, 2800, 3200, 3600}
	fs := CheckRecording(rec, DefaultRules())
	if len(fs) != 1 || fs[0].Check != "discharge.doublet" || !strings.Contains(fs[0].Message, "(9.8 ms)") {
		t.Fatalf("got %v", fs)
	}
	// 41 samples = 20.02 ms is not a doublet under a 20 ms gate.
	u.Discharges[1] = 41
	if fs := CheckRecording(rec, DefaultRules()); len(fs) != 0 {
		t.Fatalf("41 samples at 2048 Hz (20.02 ms) flagged: %v", fs)
	}
}

// TestSustainedRate checks the rate arithmetic: 5 intervals of 41 samples at
// 2048 Hz are 5/(205/2048) = 49.95 pps (not above 50); 40 samples give
// 51.2 pps (above).
func TestSustainedRate(t *testing.T) {
	r := DefaultRules()
	r.Disabled = []string{"discharge.doublet", "discharge.few"}
	for _, c := range []struct {
		step int64
		want bool
	}{{41, false}, {40, true}} {
		rec := goodRecording()
		u := unitOf(rec, 0)
		u.Discharges = nil
		for i := int64(0); i < 6; i++ {
			u.Discharges = append(u.Discharges, 500+c.step*i)
		}
		fs := finish(CheckRecording(rec, r), Options{Rules: r})
		got := len(fs) == 1 && fs[0].Check == "discharge.rate_high"
		if got != c.want || (!c.want && len(fs) != 0) {
			t.Fatalf("step %d: %v", c.step, fs)
		}
		if c.want && !strings.Contains(fs[0].Message, "51.2 pps") {
			t.Fatalf("message: %s", fs[0].Message)
		}
	}
}

// TestLowConfidence: gates silhouette 0.90 and PNR 30 dB (common practice,
// from memory); unknown figures are not held against a unit.
func TestLowConfidence(t *testing.T) {
	r := DefaultRules()
	u := record.NewUnit(1)
	if LowConfidence(u, r) {
		t.Fatal("unit with unknown figures is low-confidence")
	}
	for _, c := range []struct {
		sil, pnr float64
		want     bool
	}{{0.90, 30, false}, {0.8999, 30, true}, {0.95, 29.99, true}, {math.NaN(), 10, true}, {0.5, math.NaN(), true}, {1, 60, false}} {
		u.Silhouette, u.PNRdB = c.sil, c.pnr
		if got := LowConfidence(u, r); got != c.want {
			t.Errorf("sil %v pnr %v: %v, want %v", c.sil, c.pnr, got, c.want)
		}
	}
	r.SilhouetteMin = 0.8
	u.Silhouette, u.PNRdB = 0.85, 31
	if LowConfidence(u, r) {
		t.Error("threshold from rules not used")
	}
	if !LowConfidence(record.Unit{ID: 1, Silhouette: 0.5, PNRdB: 40}, Rules{}) {
		t.Error("zero Rules should mean DefaultRules")
	}
}

func TestSeverityJSON(t *testing.T) {
	for s, w := range map[Severity]string{Note: `"note"`, Warning: `"warning"`, Error: `"error"`} {
		b, err := s.MarshalJSON()
		if err != nil || string(b) != w {
			t.Fatalf("%v: %s %v", s, b, err)
		}
		var back Severity
		if err := back.UnmarshalJSON(b); err != nil || back != s {
			t.Fatalf("%s: %v %v", b, back, err)
		}
	}
	var s Severity
	if s.UnmarshalJSON([]byte(`"fatal"`)) == nil {
		t.Fatal("unknown severity accepted")
	}
}

// Stored infinities are reported where they are (an import with
// --allow-out-of-range can store them; NaN stays "not known" and silent).
func TestStoredInfinities(t *testing.T) {
	r := goodRecording()
	r.Trials[0].Force.Values[7] = math.Inf(1)
	r.Trials[0].Force.Values[9] = math.Inf(-1)
	unitOf(r, 1).PNRdB = math.Inf(1)
	unitOf(r, 2).Silhouette = math.NaN()
	var got []string
	for _, f := range CheckRecording(r, DefaultRules()) {
		if f.Check == "values.infinite" {
			got = append(got, f.HDF5Path+": "+f.Message)
		}
	}
	want := []string{
		"/trials/" + r.Trials[0].Name + "/force: force holds 2 infinities (first at index 7: +Inf)",
		"/trials/" + r.Trials[0].Name + "/arrays/" + r.Trials[0].Arrays[0].Name + "/decompositions/" + r.Trials[0].Arrays[0].Decompositions[0].Name + "/units/pnr_db: unit column pnr_db holds 1 infinities (first at index 1: +Inf)",
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Fatalf("got\n%s\nwant\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
}
