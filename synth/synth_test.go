package synth

import (
	"bytes"
	"encoding/json"
	"errors"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"runtime"
	"sort"
	"strings"
	"testing"

	"muarc/internal/atomicfile"
	"muarc/record"
)

// The checks in this file assert properties of our model (the generator is
// built to have them); they are not measurements of real muscles. Where a
// range comes from the physiology literature it is marked common practice
// or from memory.

func generate(t testing.TB, cfg Config) []*Generated {
	t.Helper()
	gs, err := Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return gs
}

// readAll64 reads a source whole in blocks of the given row counts (cycled).
func readAll64(t testing.TB, s record.SampleSource, split []int) []float64 {
	t.Helper()
	rows, ch := s.Shape()
	out := make([]float64, rows*ch)
	for r, i := 0, 0; r < rows; i++ {
		n := min(split[i%len(split)], rows-r)
		if err := s.ReadFloat64(r, out[r*ch:(r+n)*ch]); err != nil {
			t.Fatal(err)
		}
		r += n
	}
	return out
}

// --- test-local figure rules, written apart from the package's own ---

// plateauRate returns 1/mean ISI (pps) and the ISI CoV of the intervals
// between discharges inside [p0, p1).
func plateauRate(d []int64, fs float64, p0, p1 int64) (rate, cov float64, n int) {
	var isi []float64
	for i := 1; i < len(d); i++ {
		if d[i-1] >= p0 && d[i] < p1 {
			isi = append(isi, float64(d[i]-d[i-1])/fs)
		}
	}
	if len(isi) < 3 {
		return math.NaN(), math.NaN(), len(isi)
	}
	m, s := meanSD(isi)
	return 1 / m, s / m, len(isi)
}

func meanSD(x []float64) (float64, float64) {
	var m float64
	for _, v := range x {
		m += v
	}
	m /= float64(len(x))
	var ss float64
	for _, v := range x {
		ss += (v - m) * (v - m)
	}
	return m, math.Sqrt(ss / float64(len(x)-1))
}

func pearson(x, y []float64) float64 {
	mx, sx := meanSD(x)
	my, sy := meanSD(y)
	var c float64
	for i := range x {
		c += (x[i] - mx) * (y[i] - my)
	}
	return c / float64(len(x)-1) / (sx * sy)
}

func TestReproducibleFromSeed(t *testing.T) {
	cfg := TestConfig()
	a := generate(t, cfg)
	b := generate(t, cfg)
	for i := range a {
		if !reflect.DeepEqual(a[i].Truth, b[i].Truth) {
			t.Fatalf("subject %d: truth differs between two runs with seed %d", i, cfg.Seed)
		}
		ra, rb := a[i].Recording, b[i].Recording
		for ti := range ra.Trials {
			if !reflect.DeepEqual(ra.Trials[ti].Force, rb.Trials[ti].Force) {
				t.Fatalf("trial %d: force differs", ti)
			}
			for ai := range ra.Trials[ti].Arrays {
				x := readAll64(t, ra.Trials[ti].Arrays[ai].Samples, []int{1000})
				y := readAll64(t, rb.Trials[ti].Arrays[ai].Samples, []int{1000})
				if !reflect.DeepEqual(x, y) {
					t.Fatalf("trial %d array %d: EMG differs", ti, ai)
				}
			}
		}
	}
	// Same seed -> byte-identical exports.
	da, db := t.TempDir(), t.TempDir()
	for i := range a {
		if err := a[i].WriteExports(da); err != nil {
			t.Fatal(err)
		}
		if err := b[i].WriteExports(db); err != nil {
			t.Fatal(err)
		}
	}
	fa, fb := readTree(t, da), readTree(t, db)
	if len(fa) < 10 {
		t.Fatalf("only %d export files", len(fa))
	}
	if !reflect.DeepEqual(fa, fb) {
		t.Fatal("exports of two runs with the same seed differ")
	}
	// Another seed -> a different study.
	cfg.Seed++
	c := generate(t, cfg)
	if reflect.DeepEqual(a[0].Truth.Trials, c[0].Truth.Trials) {
		t.Fatal("seeds differ but the truth is the same")
	}
	x := readAll64(t, a[0].Recording.Trials[0].Arrays[0].Samples, []int{4096})
	y := readAll64(t, c[0].Recording.Trials[0].Arrays[0].Samples, []int{4096})
	if reflect.DeepEqual(x, y) {
		t.Fatal("seeds differ but the EMG is the same")
	}
}

func readTree(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	out := map[string][]byte{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		rel, _ := filepath.Rel(dir, p)
		out[rel] = b
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func TestStreamingIndependentOfBlockSplit(t *testing.T) {
	g := generate(t, TestConfig())[0]
	sources := []record.SampleSource{
		g.Recording.Trials[1].Arrays[0].Samples,
		g.Recording.Trials[0].Arrays[1].Samples,
		BenchSource(64, 2048, 3, 11),
	}
	for si, s := range sources {
		rows, ch := s.Shape()
		whole := readAll64(t, s, []int{rows})
		for _, split := range [][]int{{1}, {7, 1, 333}, {4096}, {scratchRows + 1, 3}} {
			if got := readAll64(t, s, split); !reflect.DeepEqual(got, whole) {
				t.Fatalf("source %d: split %v gives other values", si, split)
			}
		}
		// ReadFloat32 is the float32 rounding of ReadFloat64, in any split.
		f32 := make([]float32, rows*ch)
		for r := 0; r < rows; r += 1500 {
			n := min(1500, rows-r)
			if err := s.ReadFloat32(r, f32[r*ch:(r+n)*ch]); err != nil {
				t.Fatal(err)
			}
		}
		for i, v := range whole {
			if f32[i] != float32(v) {
				t.Fatalf("source %d value %d: float32 %v, float64 %v", si, i, f32[i], v)
			}
		}
		// Values are quantised to 0.01 uV and not all noise-free zeros.
		var nz int
		for _, v := range whole {
			if math.Abs(v*100-math.Round(v*100)) > 1e-6 {
				t.Fatalf("source %d: value %v not on the 0.01 uV grid", si, v)
			}
			if v != 0 {
				nz++
			}
		}
		if nz < len(whole)/2 {
			t.Fatalf("source %d: only %d of %d values non-zero", si, nz, len(whole))
		}
		// Bad requests are errors, not panics.
		if err := s.ReadFloat64(rows-1, make([]float64, 2*ch)); err == nil {
			t.Fatalf("source %d: read past the end accepted", si)
		}
		if err := s.ReadFloat64(0, make([]float64, ch+1)); err == nil {
			t.Fatalf("source %d: partial row accepted", si)
		}
		if err := s.ReadFloat32(-1, make([]float32, ch)); err == nil {
			t.Fatalf("source %d: negative start accepted", si)
		}
	}
}

// TestNoiseIsGaussian checks the counter-based noise of a source without
// units: mean 0, SD as configured, and the share within 1 SD of a normal
// distribution (68.27 %, a textbook value).
func TestNoiseIsGaussian(t *testing.T) {
	s := &emgSource{rows: 20000, channels: 8, firstLag: 0, lags: 1, noiseSD: []float64{5, 5, 5, 5, 5, 5, 5, 5}, key: 99}
	v := readAll64(t, s, []int{999})
	m, sd := meanSD(v)
	in1 := 0
	for _, x := range v {
		if math.Abs(x) <= 5 {
			in1++
		}
	}
	if math.Abs(m) > 0.05 || math.Abs(sd-5) > 0.05 {
		t.Fatalf("noise mean %.4f SD %.4f, want 0 and 5", m, sd)
	}
	if p := float64(in1) / float64(len(v)); math.Abs(p-0.6827) > 0.005 {
		t.Fatalf("share within 1 SD %.4f, want 0.6827", p)
	}
	// Neighbouring values are uncorrelated.
	if r := pearson(v[:len(v)-1], v[1:]); math.Abs(r) > 0.01 {
		t.Fatalf("lag-1 correlation %.4f", r)
	}
}

// eachArray calls fn for every trial and array with its truth.
func eachArray(t *testing.T, g *Generated, fn func(tt TrialTruth, at ArrayTruth, trial record.Trial)) {
	for ti, tt := range g.Truth.Trials {
		for _, at := range tt.Arrays {
			fn(tt, at, g.Recording.Trials[ti])
		}
	}
}

func TestRateFallsWithRecruitmentThreshold(t *testing.T) {
	g := generate(t, TestConfig())[0]
	fs := TestConfig().SamplingRateHz
	checked := 0
	eachArray(t, g, func(tt TrialTruth, at ArrayTruth, trial record.Trial) {
		var thr, rate []float64
		for _, u := range at.Units {
			r, _, n := plateauRate(u.Discharges, fs, tt.PlateauStart, tt.PlateauEnd)
			if n < 3 {
				continue
			}
			// Recruitment threshold from the force at the first discharge.
			thr = append(thr, 100*trial.Force.Values[u.Discharges[0]]/trial.MVC)
			rate = append(rate, r)
		}
		if len(thr) < 5 {
			t.Fatalf("%s/%s: only %d units on the plateau", tt.Trial, at.Array, len(thr))
		}
		// The inverse relation of plateau rate to recruitment threshold
		// (reported in the field, from memory); asserted as a property of
		// our model.
		if r := pearson(thr, rate); r > -0.5 {
			t.Errorf("%s/%s: Pearson r(threshold, plateau rate) = %.3f, want < -0.5", tt.Trial, at.Array, r)
		}
		checked++
	})
	if checked != 4 {
		t.Fatalf("checked %d trial arrays, want 4", checked)
	}
}

func TestRatesAndVariability(t *testing.T) {
	cfg := TestConfig()
	g := generate(t, cfg)[0]
	fs := cfg.SamplingRateHz
	var inits, rates, covs []float64
	eachArray(t, g, func(tt TrialTruth, at ArrayTruth, _ record.Trial) {
		for _, u := range at.Units {
			if u.AutoID == 0 {
				continue
			}
			d := u.Discharges
			// Initial rate: 3 / (t3 - t0), the first three intervals.
			inits = append(inits, 3*fs/float64(d[3]-d[0]))
			r, c, _ := plateauRate(d, fs, tt.PlateauStart, tt.PlateauEnd)
			rates = append(rates, r)
			covs = append(covs, c)
		}
	})
	if len(inits) < 20 {
		t.Fatalf("only %d units", len(inits))
	}
	// Ranges common in voluntary isometric contractions (common practice,
	// from memory): initial 6-10 pps, plateau 10-35 pps, ISI CoV 0.1-0.25.
	// A finite sample scatters, so 90 % inside and all within wider bounds.
	within(t, "initial rate (pps)", inits, 6, 10, 5, 11.5)
	within(t, "plateau rate (pps)", rates, 10, 35, 9, 36)
	within(t, "ISI CoV", covs, 0.1, 0.25, 0.07, 0.3)
	if m, _ := meanSD(inits); m < 7 || m > 9 {
		t.Errorf("mean initial rate %.2f pps, want 7-9", m)
	}
}

func within(t *testing.T, what string, x []float64, lo, hi, hardLo, hardHi float64) {
	t.Helper()
	in := 0
	for _, v := range x {
		if v >= lo && v <= hi {
			in++
		}
		if !(v >= hardLo && v <= hardHi) {
			t.Errorf("%s: %.3f outside %g..%g", what, v, hardLo, hardHi)
		}
	}
	if float64(in) < 0.9*float64(len(x)) {
		t.Errorf("%s: %d of %d within %g..%g, want 90 %%", what, in, len(x), lo, hi)
	}
}

func TestForceFollowsTarget(t *testing.T) {
	cfg := TestConfig()
	g := generate(t, cfg)[0]
	for ti, tt := range g.Truth.Trials {
		tr := g.Recording.Trials[ti]
		f, tg := tr.Force.Values, tr.ForceTarget.Values
		want := tt.TargetPctMVC / 100 * tr.MVC
		var dev []float64
		var sum float64
		for k := tt.PlateauStart; k < tt.PlateauEnd; k++ {
			dev = append(dev, f[k]-tg[k])
			sum += f[k]
			if tg[k] != math.Round(want*1e4)/1e4 {
				t.Fatalf("%s: plateau target %v, want %v", tt.Trial, tg[k], want)
			}
		}
		mean := sum / float64(len(dev))
		var ss float64
		for _, d := range dev {
			ss += d * d
		}
		rms := math.Sqrt(ss / float64(len(dev)))
		// Stated tolerance (a property of our model): plateau mean within
		// 0.5 % of the target, RMS deviation within 5 % of it.
		if math.Abs(mean-want) > 0.005*want || rms > 0.05*want {
			t.Errorf("%s: plateau mean %.2f N (target %.2f N), RMS deviation %.2f N", tt.Trial, mean, want, rms)
		}
		if rms < 0.002*want {
			t.Errorf("%s: plateau RMS deviation %.3f N: force is suspiciously flat", tt.Trial, rms)
		}
		// On the ramps a 100 ms moving mean stays within 10 % of the level.
		w := int(0.1 * cfg.SamplingRateHz)
		r0 := int(math.Round(cfg.RestS * cfg.SamplingRateHz))
		for _, span := range [][2]int{{r0 + w, int(tt.PlateauStart)}, {int(tt.PlateauEnd) + w, int(tt.PlateauEnd) + int(cfg.RampS*cfg.SamplingRateHz)}} {
			for k := span[0]; k+w <= span[1]; k += w {
				var mf, mt float64
				for j := k; j < k+w; j++ {
					mf += f[j]
					mt += tg[j]
				}
				if math.Abs(mf-mt)/float64(w) > 0.1*want {
					t.Errorf("%s: ramp at %.2f s: force %.2f N, target %.2f N", tt.Trial, float64(k)/cfg.SamplingRateHz, mf/float64(w), mt/float64(w))
				}
			}
		}
		if math.Abs(tt.ForceScale-1) > 0.15 {
			t.Errorf("%s: per-trial force scale %.3f far from 1: the steady-state model is off", tt.Trial, tt.ForceScale)
		}
	}
}

func TestRecruitmentOrderAndDerecruitment(t *testing.T) {
	g := generate(t, TestConfig())[0]
	eachArray(t, g, func(tt TrialTruth, at ArrayTruth, trial record.Trial) {
		prev := -1.0
		var prevFirst int64
		for i, u := range at.Units {
			// Pool order is threshold order; a unit with a higher threshold
			// starts no earlier than 0.2 s before a lower one (the drive
			// fluctuation and the start jitter may swap close neighbours).
			if u.ExcitationThresholdPct < prev {
				t.Fatalf("pool not in threshold order")
			}
			prev = u.ExcitationThresholdPct
			if i > 0 && u.Discharges[0] < prevFirst-int64(0.2*trial.Force.SamplingRateHz) {
				t.Errorf("%s/%s unit %d recruited at %d, before the lower-threshold unit (%d)", tt.Trial, at.Array, u.Pool, u.Discharges[0], prevFirst)
			}
			prevFirst = u.Discharges[0]
			last := u.Discharges[len(u.Discharges)-1]
			if last < tt.PlateauEnd || last >= int64(len(trial.Force.Values)) {
				t.Errorf("%s/%s unit %d: last discharge at %d, not on the ramp down", tt.Trial, at.Array, u.Pool, last)
			}
			if first := u.Discharges[0]; first >= tt.PlateauStart && u.AutoID > 0 {
				t.Errorf("%s/%s unit %d: a decomposed unit recruited on the plateau", tt.Trial, at.Array, u.Pool)
			}
		}
		// Derecruitment before the force reaches rest again: no discharge in
		// the final rest.
		for _, u := range at.Units {
			for _, d := range u.Discharges {
				if trial.ForceTarget.Values[d] == 0 && d > tt.PlateauEnd+int64(0.2*trial.Force.SamplingRateHz) {
					t.Errorf("%s/%s unit %d discharges at rest (%d)", tt.Trial, at.Array, u.Pool, d)
					break
				}
			}
		}
	})
}

func TestMUAPsSmoothAcrossTheGrid(t *testing.T) {
	cfg := TestConfig()
	cfg.Arrays[0] = ArraySpec{Rows: 13, Columns: 5, SkipCorner: true, IEDMm: 8, BadChannel: -1,
		Sites: []Site{{"ta_grid", "tibialis anterior", 0}}}
	g := generate(t, cfg)[0]
	arr := g.Recording.Trials[1].Arrays[0]
	m := arr.Decompositions[0].MUAPs
	if m == nil || m.Units != len(arr.Decompositions[0].Units) || m.Channels != 64 {
		t.Fatalf("MUAPs %+v", m)
	}
	if d := float64(m.Lags) / cfg.SamplingRateHz * 1000; d < 10 || d > 30 {
		t.Fatalf("MUAP window %.1f ms, want 10-30", d)
	}
	at := g.Truth.Trials[1].Arrays[0]
	byID := map[int64]UnitTruth{}
	for _, u := range at.Units {
		byID[u.AutoID] = u
	}
	pos := map[[2]int]int{}
	for c, ch := range arr.Channels {
		pos[[2]int{ch.Row, ch.Column}] = c
	}
	for ui, unit := range arr.Decompositions[0].Units {
		p2p := make([]float64, m.Channels)
		peakLag := make([]int, m.Channels)
		for c := range m.Channels {
			lo, hi := math.Inf(1), math.Inf(-1)
			for l := range m.Lags {
				v := float64(m.At(ui, c, l))
				if v < lo {
					lo, peakLag[c] = v, l
				}
				hi = max(hi, v)
			}
			p2p[c] = hi - lo
		}
		// Smooth map: Geary's contiguity ratio C over right and lower
		// neighbours (Geary 1954: C = (N-1) sum_pairs (a_i-a_j)^2 /
		// (2 W sum_i (a_i-mean)^2), about 1 for a map without spatial
		// structure, towards 0 for a smooth one).
		geary := gearyC(p2p, arr.Channels, pos)
		if geary > 0.35 {
			t.Errorf("unit %d: Geary's C of the amplitude map %.3f, want <= 0.35", unit.ID, geary)
		}
		// Control: the same values on shuffled electrodes are not smooth.
		shuf := make([]float64, len(p2p))
		for i := range p2p {
			shuf[i] = p2p[(i*37+11)%len(p2p)]
		}
		if c := gearyC(shuf, arr.Channels, pos); c < 0.6 {
			t.Errorf("unit %d: shuffled map has Geary's C %.3f; the check does not discriminate", unit.ID, c)
		}
		// Latency grows with distance from the innervation point along the
		// fibres (rows): the main negative peak comes later at the grid
		// row farthest from it than at the nearest one, in the column
		// nearest the innervation point.
		tu := byID[unit.ID]
		col := int(math.Round(max(0, min(4, tu.InnervationXMm/8))))
		near, far := -1, -1
		for c, ch := range arr.Channels {
			if ch.Column != col {
				continue
			}
			d := math.Abs(ch.YMm - tu.InnervationYMm)
			if near < 0 || d < math.Abs(arr.Channels[near].YMm-tu.InnervationYMm) {
				near = c
			}
			if far < 0 || d > math.Abs(arr.Channels[far].YMm-tu.InnervationYMm) {
				far = c
			}
		}
		dist := math.Abs(arr.Channels[far].YMm-tu.InnervationYMm) - math.Abs(arr.Channels[near].YMm-tu.InnervationYMm)
		wantLag := dist / tu.ConductionMPerS / 1000 * cfg.SamplingRateHz // samples
		if got := float64(peakLag[far] - peakLag[near]); math.Abs(got-wantLag) > 2 {
			t.Errorf("unit %d: latency shift %v samples over %.0f mm, want %.1f", unit.ID, got, dist, wantLag)
		}
		if p2p[near] < 1.5*p2p[far] {
			t.Errorf("unit %d: amplitude near the innervation point %.1f uV, far %.1f uV: no fall-off", unit.ID, p2p[near], p2p[far])
		}
	}
}

func TestDecompositions(t *testing.T) {
	g := generate(t, TestConfig())[0]
	for ti, tr := range g.Recording.Trials {
		for ai, arr := range tr.Arrays {
			want := 1
			if ai == 0 {
				want = 2
			}
			if len(arr.Decompositions) != want {
				t.Fatalf("%s/%s: %d decompositions", tr.Name, arr.Name, len(arr.Decompositions))
			}
			at := g.Truth.Trials[ti].Arrays[ai]
			truthOf := map[int64]UnitTruth{}
			for _, u := range at.Units {
				if u.AutoID > 0 {
					truthOf[u.AutoID] = u
				}
			}
			auto := arr.Decompositions[0]
			if len(auto.Units) != len(truthOf) || len(auto.Units) < 5 {
				t.Fatalf("%s/%s: %d auto units, %d in truth", tr.Name, arr.Name, len(auto.Units), len(truthOf))
			}
			errs := 0
			for _, u := range auto.Units {
				tu := truthOf[u.ID]
				if !sort.SliceIsSorted(u.Discharges, func(i, j int) bool { return u.Discharges[i] < u.Discharges[j] }) {
					t.Fatalf("unit %d discharges not sorted", u.ID)
				}
				if n := len(tu.Discharges) - len(tu.Missed) + len(tu.Spurious); n != len(u.Discharges) {
					t.Fatalf("unit %d: %d discharges, truth %d - %d missed + %d spurious", u.ID, len(u.Discharges), len(tu.Discharges), len(tu.Missed), len(tu.Spurious))
				}
				errs += len(tu.Missed) + len(tu.Spurious)
				// Figure ranges the generator promises (a property of
				// our model).
				if u.Silhouette < 0.85 || u.Silhouette > 0.98 || u.PNRdB < 25 || u.PNRdB > 40 || u.AccuracyPct < 90 || u.AccuracyPct > 100 {
					t.Errorf("unit %d: SIL %v PNR %v accuracy %v", u.ID, u.Silhouette, u.PNRdB, u.AccuracyPct)
				}
				// Accuracy is the rate of agreement with the truth.
				common := len(tu.Discharges) - len(tu.Missed)
				roa := 100 * float64(common) / float64(common+len(tu.Missed)+len(tu.Spurious))
				if math.Abs(u.AccuracyPct-roa) > 0.006 {
					t.Errorf("unit %d: accuracy %v, rate of agreement %v", u.ID, u.AccuracyPct, roa)
				}
				if got := 100 * tr.Force.Values[u.Discharges[0]] / tr.MVC; math.Abs(got-u.RecruitPctMVC) > 0.0006 {
					t.Errorf("unit %d: recruitment %v, force at first discharge %v %%MVC", u.ID, u.RecruitPctMVC, got)
				}
			}
			if errs == 0 {
				t.Errorf("%s/%s: detection errors asked for but none made", tr.Name, arr.Name)
			}
			if len(auto.ExtraColumns) != 1 || auto.ExtraColumns[0].Name != "twitch_time" || len(auto.ExtraColumns[0].Values) != len(auto.Units) {
				t.Errorf("extra columns %+v", auto.ExtraColumns)
			}
			if ai == 0 {
				ed := arr.Decompositions[1]
				if !ed.EditedByHand || ed.Name != "edited" || len(ed.Units) != len(auto.Units)-1 {
					t.Fatalf("edited decomposition: %+v units %d", ed.Name, len(ed.Units))
				}
				for _, u := range ed.Units {
					if !reflect.DeepEqual(u.Discharges, truthOf[u.ID].Discharges) || u.AccuracyPct != 100 {
						t.Errorf("edited unit %d is not the true train", u.ID)
					}
				}
			}
		}
	}
}

func TestInventedPeople(t *testing.T) {
	cfg := DemoConfig()
	cfg.Subjects = 10
	cfg.LevelsPctMVC = []float64{10}
	cfg.PlateauS, cfg.RampS = 1, 0.5
	gs := generate(t, cfg)
	phone := regexp.MustCompile(`^\+1-555-01\d\d$`) // 555-0100..0199: reserved for fiction (common practice)
	date := regexp.MustCompile(`\d{4}-\d{2}-\d{2}`)
	seen := map[string]bool{}
	for _, g := range gs {
		s := g.Recording.Subject
		if !phone.MatchString(s.Phone) || !strings.HasSuffix(s.Email, "@example.org") { // RFC 2606 section 3
			t.Errorf("subject %s: phone %q email %q", s.ID, s.Phone, s.Email)
		}
		if !strings.Contains(s.Notes, s.Name) || !date.MatchString(s.Notes) {
			t.Errorf("subject %s: notes %q lack the name or a date", s.ID, s.Notes)
		}
		if !date.MatchString(s.BirthDate) || s.AgeYears < 18 || s.AgeYears > 70 {
			t.Errorf("subject %s: birth %q age %v", s.ID, s.BirthDate, s.AgeYears)
		}
		if seen[s.ID] || seen[s.Name] {
			t.Errorf("subject %s / %s repeated", s.ID, s.Name)
		}
		seen[s.ID], seen[s.Name] = true, true
		if g.Truth.MVCN < 200 || g.Truth.MVCN > 400 {
			t.Errorf("MVC %v N", g.Truth.MVCN)
		}
	}
	// Three muscles over the subjects, two arrays per trial.
	muscles := map[string]bool{}
	for _, g := range gs[:3] {
		for _, a := range g.Recording.Trials[0].Arrays {
			muscles[a.Muscle] = true
		}
	}
	if len(muscles) != 3 {
		t.Errorf("muscles %v", muscles)
	}
}

func TestConfigChecks(t *testing.T) {
	for name, mod := range map[string]func(*Config){
		"no subjects":    func(c *Config) { c.Subjects = 0 },
		"level 0":        func(c *Config) { c.LevelsPctMVC = []float64{0} },
		"level NaN":      func(c *Config) { c.LevelsPctMVC = []float64{math.NaN()} },
		"rate":           func(c *Config) { c.SamplingRateHz = 10 },
		"plateau":        func(c *Config) { c.PlateauS = 0 },
		"units":          func(c *Config) { c.UnitsPerMuscle = 1 },
		"SNR":            func(c *Config) { c.SNRdB = math.Inf(1) },
		"MVC":            func(c *Config) { c.MVCRangeN = [2]float64{300, 100} },
		"no arrays":      func(c *Config) { c.Arrays = nil },
		"empty grid":     func(c *Config) { c.Arrays[0].Rows = 0 },
		"bad channel":    func(c *Config) { c.Arrays[0].BadChannel = 16 },
		"no site":        func(c *Config) { c.Arrays[0].Sites = nil },
		"same names":     func(c *Config) { c.Arrays[1].Sites = c.Arrays[0].Sites },
		"site no muscle": func(c *Config) { c.Arrays[0].Sites = []Site{{"x", "", 0}} },
		"same level":     func(c *Config) { c.LevelsPctMVC = []float64{20, 20} },
	} {
		cfg := TestConfig()
		mod(&cfg)
		if _, err := Generate(cfg); err == nil || !strings.HasPrefix(err.Error(), "synth: ") {
			t.Errorf("%s: error %v", name, err)
		}
	}
}

func TestTruthJSON(t *testing.T) {
	g := generate(t, TestConfig())[0]
	b, err := json.Marshal(g.Truth)
	if err != nil {
		t.Fatal(err)
	}
	var back Truth
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, g.Truth) {
		t.Fatal("truth does not survive JSON")
	}
}

func TestExportsRefuseExisting(t *testing.T) {
	g := generate(t, TestConfig())[0]
	dir := t.TempDir()
	if err := g.WriteExports(dir); err != nil {
		t.Fatal(err)
	}
	meta := filepath.Join(g.ExportDir(dir), "metadata.json")
	before, _ := os.ReadFile(meta)
	if err := g.WriteExports(dir); !errors.Is(err, atomicfile.ErrExists) {
		t.Fatalf("second export: %v, want ErrExists", err)
	}
	after, _ := os.ReadFile(meta)
	if !bytes.Equal(before, after) {
		t.Fatal("refused export changed a file")
	}
	var calls int
	var last, total int64
	err := g.WriteExportsOpt(dir, ExportOptions{Overwrite: true, Progress: func(d, n int64) { calls++; last, total = d, n }})
	if err != nil || calls == 0 || last != total {
		t.Fatalf("overwrite: %v, progress %d calls, %d of %d", err, calls, last, total)
	}
}

// gearyC is Geary's contiguity ratio of a map over right and lower
// neighbours with symmetric binary weights (Geary 1954):
// C = (N-1) sum_ij w_ij (a_i-a_j)^2 / (2 W sum_i (a_i-mean)^2).
func gearyC(a []float64, chans []record.Channel, pos map[[2]int]int) float64 {
	var num float64
	var pairs int
	for c, ch := range chans {
		for _, nb := range [][2]int{{ch.Row, ch.Column + 1}, {ch.Row + 1, ch.Column}} {
			if k, ok := pos[nb]; ok {
				num += (a[c] - a[k]) * (a[c] - a[k])
				pairs++
			}
		}
	}
	_, sd := meanSD(a)
	ss := sd * sd * float64(len(a)-1)
	// Each pair appears twice in the double sum and in W.
	return float64(len(a)-1) * 2 * num / (2 * 2 * float64(pairs) * ss)
}

// TestEdgeConfigs runs small and extreme configurations: they generate
// without error and keep the basic invariants.
func TestEdgeConfigs(t *testing.T) {
	for name, mod := range map[string]func(*Config){
		"two units": func(c *Config) { c.UnitsPerMuscle = 2 },
		"level 90":  func(c *Config) { c.LevelsPctMVC = []float64{90} },
		"one array": func(c *Config) { c.Arrays = c.Arrays[:1] },
		"no errors": func(c *Config) { c.DetectionErrors, c.EditedDecomposition, c.MUAPs = false, false, false },
		"500 Hz, 1x1": func(c *Config) {
			c.SamplingRateHz = 500
			c.Arrays[0].Rows, c.Arrays[0].Columns = 1, 1
			c.Arrays[0].BadChannel = -1
		},
		"fraction level": func(c *Config) { c.LevelsPctMVC = []float64{12.5} },
	} {
		cfg := TestConfig()
		mod(&cfg)
		gs, err := Generate(cfg)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		for _, tr := range gs[0].Recording.Trials {
			for _, a := range tr.Arrays {
				n, ch := a.Samples.Shape()
				if n != len(tr.Force.Values) || ch != len(a.Channels) {
					t.Errorf("%s: samples %d x %d, force %d, channels %d", name, n, ch, len(tr.Force.Values), len(a.Channels))
				}
				for _, d := range a.Decompositions {
					for _, u := range d.Units {
						if len(u.Discharges) < minDischarges || math.IsNaN(u.MeanRatePPS) {
							t.Errorf("%s: unit %d with %d discharges, mean rate %v", name, u.ID, len(u.Discharges), u.MeanRatePPS)
						}
					}
				}
			}
		}
	}
}

// TestStreamingMemoryStaysFlat: a 600 s, 64-channel source holds only its
// templates and discharge lists, and reading a block allocates nothing
// proportional to the block after the first read.
func TestStreamingMemoryStaysFlat(t *testing.T) {
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	s := BenchSource(64, 2048, 600, 3)
	runtime.GC()
	runtime.ReadMemStats(&after)
	rows, ch := s.Shape()
	if rows != 600*2048 || ch != 64 {
		t.Fatalf("shape %d x %d", rows, ch)
	}
	if grown := int64(after.HeapAlloc) - int64(before.HeapAlloc); grown > 4<<20 {
		t.Fatalf("a 600 s source holds %d bytes; the samples would be %d", grown, rows*ch*4)
	}
	buf := make([]float32, 4096*ch)
	if err := s.ReadFloat32(rows/2, buf); err != nil {
		t.Fatal(err)
	}
	allocs := testing.AllocsPerRun(5, func() {
		if err := s.ReadFloat32(rows/3, buf); err != nil {
			t.Fatal(err)
		}
	})
	if allocs > 2 {
		t.Fatalf("%.0f allocations per 4096-row read", allocs)
	}
	runtime.KeepAlive(s)
}
