package convert

import (
	"bytes"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"muarc/deid"
	"muarc/edfplus"
	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// deidentifiedSynth writes synth.TestConfig's first recording,
// de-identified with a fixed key, and returns its path and the recording.
func deidentifiedSynth(t *testing.T, dir string) (string, *record.Recording) {
	t.Helper()
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	k, err := deid.KeyFromBytes(bytes.Repeat([]byte{0x3c}, 32))
	if err != nil {
		t.Fatal(err)
	}
	res, err := deid.Apply(gens[0].Recording, deid.Options{Pseudonymizer: deid.NewPseudonymizer(k), Now: time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "deid.h5")
	if err := recfile.Write(p, res.Recording, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	rec, err := recfile.ReadAll(p)
	if err != nil {
		t.Fatal(err)
	}
	return p, rec
}

// TestEDFRoundTrip: muarc -> BDF+ (and EDF+) -> muarc gives every sample
// back within half a digital step of the written file (the file's
// resolution), the same discharges exactly, and a second round trip from
// the imported recording writes the same digital values (its calibration
// is reused, so nothing rounds twice).
func TestEDFRoundTrip(t *testing.T) {
	dir := t.TempDir()
	src, orig := deidentifiedSynth(t, dir)
	for _, f := range []edfplus.Format{edfplus.BDF, edfplus.EDF} {
		out := filepath.Join(dir, f.String())
		reps, err := ExportEDF(src, EDFExportOptions{Format: f, Dir: out})
		if err != nil {
			t.Fatal(err)
		}
		if len(reps) != len(orig.Trials) {
			t.Fatalf("%d files for %d trials", len(reps), len(orig.Trials))
		}
		for ti, rep := range reps {
			ot := orig.Trials[ti]
			h := edfHeader(t, rep.File)
			// EDF+ 2.1.3.3: the patient field is "code sex birthdate name", X for unknown.
			if want := orig.Subject.ID + " " + map[string]string{"female": "F", "male": "M", "": "X"}[orig.Subject.Sex] + " X X"; h.Patient != want {
				t.Errorf("patient field %q, want %q", h.Patient, want)
			}
			if !strings.HasPrefix(h.Recording, "Startdate ") {
				t.Errorf("recording field %q", h.Recording)
			}
			if f == edfplus.EDF && (len(rep.Warnings) == 0 || !strings.Contains(rep.Warnings[0], "largest rounding error")) {
				t.Errorf("EDF export without a rounding warning: %v", rep.Warnings)
			}
			// Import the file back.
			back := filepath.Join(dir, f.String()+"-"+ot.Name+".h5")
			if _, err := ImportRecording(Inputs{EMG: []string{rep.File}, Dir: out}, back, recfile.WriteOptions{}); err != nil {
				t.Fatal(err)
			}
			got, err := recfile.ReadAll(back)
			if err != nil {
				t.Fatal(err)
			}
			gt := got.Trials[0]
			if len(gt.Arrays) != len(ot.Arrays) {
				t.Fatalf("%d arrays back, wrote %d", len(gt.Arrays), len(ot.Arrays))
			}
			steps := map[string]float64{}
			for _, s := range rep.Signals {
				steps[s.Source] = s.StepSize
			}
			for ai, oa := range ot.Arrays {
				ga := gt.Arrays[ai]
				if ga.Name != oa.Name || ga.SamplingRateHz != oa.SamplingRateHz || len(ga.Channels) != len(oa.Channels) {
					t.Fatalf("array %+v, wrote %+v", ga.Name, oa.Name)
				}
				on, oc := oa.Samples.Shape()
				gn, _ := ga.Samples.Shape()
				if gn != on {
					t.Fatalf("array %s: %d samples back, wrote %d", oa.Name, gn, on)
				}
				ov := make([]float64, on*oc)
				oa.Samples.ReadFloat64(0, ov)
				gv := ga.Samples.(*record.MemSamples).F64
				for i := range ov {
					ch := oa.Channels[i%oc].Label
					if ga.Channels[i%oc].Label != ch {
						t.Fatalf("channel %d label %q, wrote %q", i%oc, ga.Channels[i%oc].Label, ch)
					}
					// Half a step, plus the rounding of the physical-minimum offset in
					// float64 (about 1e-9 of a step for 24-bit BDF).
					if d := math.Abs(gv[i] - ov[i]); d > steps[oa.Name+"/"+ch]/2*(1+1e-6) {
						t.Fatalf("%s %s/%s sample %d: %g back, %g stored (step %g)", f, oa.Name, ch, i/oc, gv[i], ov[i], steps[oa.Name+"/"+ch])
					}
				}
				for di, od := range oa.Decompositions {
					gd := decompNamed(&ga, od.Name)
					if len(gd.Units) != len(od.Units) {
						t.Fatalf("%s decomposition %s: %d units back, wrote %d", oa.Name, od.Name, len(gd.Units), len(od.Units))
					}
					for ui, u := range od.Units {
						if gd.Units[ui].ID != u.ID || !equalInts(gd.Units[ui].Discharges, u.Discharges) {
							t.Fatalf("%s/%s unit %d: discharges differ (%d back, %d written)", oa.Name, od.Name, u.ID, len(gd.Units[ui].Discharges), len(u.Discharges))
						}
					}
					_ = di
				}
			}
			if len(gt.Force.Values) != len(ot.Force.Values) || gt.Force.Unit != ot.Force.Unit {
				t.Fatalf("force: %d values %s back, wrote %d %s", len(gt.Force.Values), gt.Force.Unit, len(ot.Force.Values), ot.Force.Unit)
			}
			for i, v := range ot.Force.Values {
				if math.Abs(gt.Force.Values[i]-v) > steps["force"]/2*(1+1e-9) {
					t.Fatalf("force sample %d: %g back, %g stored", i, gt.Force.Values[i], v)
				}
			}
			// Second round: the imported recording exports without rounding.
			reps2, err := ExportEDF(back, EDFExportOptions{Format: f, Dir: filepath.Join(dir, "again-"+f.String()+ot.Name), AllowIdentified: true})
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range reps2[0].Signals {
				if s.Source != "force" && s.Source != "force_target" && (s.MaxAbsError != 0 || !s.Exact) {
					t.Errorf("second export of %s rounds: %+v", s.Source, s)
				}
			}
		}
	}
}

func equalInts(a, b []int64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestEDFExportRefusesIdentified: a recording with a name is refused
// unless AllowIdentified, and nothing is written.
func TestEDFExportRefusesIdentified(t *testing.T) {
	dir := t.TempDir()
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "id.h5")
	if err := recfile.Write(p, gens[0].Recording, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	_, err = ExportEDF(p, EDFExportOptions{Format: edfplus.BDF, Dir: filepath.Join(dir, "out")})
	if err == nil || !strings.Contains(err.Error(), "identifying") || !strings.Contains(err.Error(), "--allow-identified") {
		t.Fatalf("got %v", err)
	}
	reps, err := ExportEDF(p, EDFExportOptions{Format: edfplus.BDF, Dir: filepath.Join(dir, "out"), AllowIdentified: true})
	if err != nil || len(reps) == 0 {
		t.Fatal(err)
	}
}

func TestRecordDuration(t *testing.T) {
	// 2048 Hz EMG of 20480 samples and 100 Hz force of 1000 samples: 2 s
	// records give 4096 and 200 samples, 5 records each, (2*4096+200)*3 =
	// 25176 bytes; 5 s records would take 62940 bytes, over the 61440 of
	// the EDF+ guidance.
	ps := []*planned{{rate: 2048, n: 20480}, {rate: 2048, n: 20480}, {rate: 100, n: 1000}}
	d, text, padded, err := recordDuration(ps, edfplus.BDF)
	if err != nil || padded || text != "2" || d != 2 {
		t.Fatalf("%g %q %v %v", d, text, padded, err)
	}
	// 1000 samples at 2048 Hz: no duration divides; padded.
	ps = []*planned{{rate: 2048, n: 1000}}
	if _, _, padded, err = recordDuration(ps, edfplus.BDF); err != nil || !padded {
		t.Fatalf("%v %v", padded, err)
	}
	// 1000.5 Hz gives whole samples only in even seconds: 4 s records hold
	// all 4002 samples in 12006 bytes.
	ps = []*planned{{rate: 1000.5, n: 4002}}
	if d, _, _, err = recordDuration(ps, edfplus.BDF); err != nil || d != 4 {
		t.Fatalf("%g %v", d, err)
	}
	ps = []*planned{{rate: math.Pi * 1000, n: 10}}
	if _, _, _, err = recordDuration(ps, edfplus.BDF); err == nil {
		t.Fatal("an irrational rate got a record duration")
	}
}
