package convert

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/edfplus"
	"muarc/internal/reftest"
	"muarc/recfile"
	"muarc/record"
)

// edflibFixture compiles edfplus/testdata/edflib_writer.c against EDFlib
// (Debian libedf-dev) and has it write a fixture of the given kind, with
// more annotations ("ONSET_100US\tTEXT") when given.
func edflibFixture(t *testing.T, dir, kind string, annotations ...string) string {
	t.Helper()
	gcc := reftest.NeedTool(t, "gcc", "gcc")
	if _, err := os.Stat("/usr/include/edflib.h"); err != nil {
		reftest.NeedTool(t, "edflib.h", "libedf-dev")
	}
	bin := filepath.Join(dir, "edflib_writer")
	if _, err := os.Stat(bin); err != nil {
		if out, err := exec.Command(gcc, "-O1", "-o", bin, "../edfplus/testdata/edflib_writer.c", "-ledf").CombinedOutput(); err != nil {
			t.Fatalf("gcc: %v\n%s", err, out)
		}
	}
	path := filepath.Join(dir, "trial_1", "amp."+kind)
	os.MkdirAll(filepath.Dir(path), 0o755)
	args := []string{path, kind}
	if len(annotations) > 0 {
		list := filepath.Join(dir, "annotations.txt")
		if err := os.WriteFile(list, []byte(strings.Join(annotations, "\n")+"\n"), 0o644); err != nil {
			t.Fatal(err)
		}
		args = append(args, list)
	}
	if out, err := exec.Command(bin, args...).CombinedOutput(); err != nil {
		t.Fatalf("edflib_writer: %v\n%s", err, out)
	}
	return path
}

// TestImportEDFlibExact imports EDFlib's fixtures (known digital values,
// see edflib_writer.c) and proves the import lossless at the file's
// resolution: every stored float64 sample gives back, through the header's
// scaling, exactly the digital value EDFlib wrote; the force signal, the
// annotations, units, prefiltering and start time arrive as written.
func TestImportEDFlibExact(t *testing.T) {
	dir := t.TempDir()
	for _, kind := range []string{"edf", "bdf"} {
		path := edflibFixture(t, dir, kind)
		prof := DefaultProfile()
		prof.EDF = ProfileEDF{Arrays: map[string][]string{"grid_a": {"EMG r1c1"}, "grid_b": {"EMG r1c2"}}}
		r1, c2 := 0, 1
		prof.EMG.Channels = map[string]ChannelPlace{"EMG r1c1": {Row: &r1, Column: &r1}, "EMG r1c2": {Row: &r1, Column: &c2}}
		out := filepath.Join(dir, kind+".h5")
		rep, err := ImportRecording(Inputs{EMG: []string{path}, Profile: prof, Dir: dir}, out, recfile.WriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		rec, err := recfile.ReadAll(out)
		if err != nil {
			t.Fatal(err)
		}
		tr := rec.Trials[0]
		if len(tr.Arrays) != 2 || tr.Arrays[0].Name != "grid_a" || tr.Arrays[1].Name != "grid_b" {
			t.Fatalf("arrays %+v", tr.Arrays)
		}
		dmin, dmax := int64(-32768), int64(32767)
		if kind == "bdf" {
			dmin, dmax = -8388608, 8388607
		}
		r, err := edfplus.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		h := r.Header
		r.Close()
		// edflib_writer.c: signal s, sample n has digital dmin + (n*7919 + s*104729) mod (dmax-dmin+1).
		for s, a := range tr.Arrays {
			// One calibration per array: the digital values are stored as
			// counts with the header's scale (EDF: 16-bit, BDF: 24-bit
			// two's complement samples; EDF specification, "data record").
			wantType := map[string]record.SampleType{"edf": record.Int16, "bdf": record.Int32}[kind]
			sig := h.Signals[s]
			wantSF := (sig.PhysicalMax - sig.PhysicalMin) / float64(sig.DigitalMax-sig.DigitalMin)
			if a.SampleType != wantType || a.Scale.ScaleFactor != wantSF || a.Scale.AddOffset != sig.PhysicalMin-float64(float64(sig.DigitalMin)*wantSF) || a.Scale.Decimals >= 0 {
				t.Errorf("%s array %s: stored as %s with %+v", kind, a.Name, a.SampleType, a.Scale)
			}
			mc := a.Samples.(*record.MemCounts)
			for n, k := range mc.Counts {
				if want := dmin + (int64(n)*7919+int64(s)*104729)%(dmax-dmin+1); int64(k) != want {
					t.Fatalf("%s array %s count %d: %d, EDFlib wrote %d", kind, a.Name, n, k, want)
				}
			}
			m := &record.MemSamples{Samples: mc.Samples, Channels: mc.Channels, F64: make([]float64, len(mc.Counts))}
			if err := mc.ReadFloat64(0, m.F64); err != nil {
				t.Fatal(err)
			}
			if a.Unit != "uV" || a.SamplingRateHz != []float64{256, 512}[s] || a.FilterLowHz != 20 || a.FilterHighHz != 500 {
				t.Errorf("%s array %s: %+v", kind, a.Name, a)
			}
			if a.Channels[0].Row != 0 || a.Channels[0].Column != s {
				t.Errorf("%s array %s: channel place %+v from the profile", kind, a.Name, a.Channels[0])
			}
			if m.Samples != 4*int(a.SamplingRateHz) {
				t.Fatalf("%d samples", m.Samples)
			}
			for n, v := range m.F64 {
				want := dmin + (int64(n)*7919+int64(s)*104729)%(dmax-dmin+1)
				if got := h.Signals[s].Digital(v); int64(got) != want {
					t.Fatalf("%s array %s sample %d: %.17g gives digital %d, EDFlib wrote %d", kind, a.Name, n, v, got, want)
				}
			}
		}
		if tr.Force.Unit != "N" || len(tr.Force.Values) != 400 || tr.Force.SamplingRateHz != 100 {
			t.Fatalf("%s force %+v", kind, tr.Force.SamplingRateHz)
		}
		for n, v := range tr.Force.Values {
			want := dmin + (int64(n)*7919+2*104729)%(dmax-dmin+1)
			if got := h.Signals[2].Digital(v); int64(got) != want {
				t.Fatalf("%s force sample %d: digital %d, EDFlib wrote %d", kind, n, got, want)
			}
		}
		if rec.Session.Date != "2026-03-14" || tr.Extra[ExtraEDFStart] != "2026-03-14T09:30:05" {
			t.Errorf("%s start %q %v", kind, rec.Session.Date, tr.Extra[ExtraEDFStart])
		}
		var anns []edfAnnotation
		if err := json.Unmarshal([]byte(tr.Extra[ExtraEDFAnnotations].(string)), &anns); err != nil || len(anns) != 3 ||
			anns[0].Text != "ramp up" || anns[0].OnsetS != 0.5 || *anns[0].DurationS != 1.25 || anns[2].Text != "Plateau µV" || anns[1].OnsetS != 1.0001 {
			t.Errorf("%s annotations %v %+v", kind, err, anns)
		}
		if len(rep.Files) == 0 || !strings.Contains(strings.Join(rep.Files[0].Notes, " "), "3 annotations") {
			t.Errorf("%s report %+v", kind, rep.Files)
		}
	}
}

// TestImportEDFRefusesUnmapped: signals of two rates without a profile and
// a unit that is neither a voltage nor a force are refused with a hint.
func TestImportEDFRefusesUnmapped(t *testing.T) {
	dir := t.TempDir()
	path := edflibFixture(t, dir, "bdf")
	_, err := ImportRecording(Inputs{EMG: []string{path}, Dir: dir}, filepath.Join(dir, "x.h5"), recfile.WriteOptions{})
	if err == nil || !strings.Contains(err.Error(), "different rates") || !strings.Contains(err.Error(), "edf.arrays") {
		t.Fatalf("got %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "x.h5")); err == nil {
		t.Fatal("an output was left behind")
	}
}

func TestParsePrefilter(t *testing.T) {
	// EDF+ 2.1.3.5 gives "HP:0.1Hz LP:75Hz N:50Hz" as the example form.
	lo, hi := parsePrefilter("HP:0.1Hz LP:75Hz N:50Hz")
	if lo != 0.1 || hi != 75 {
		t.Fatal(lo, hi)
	}
	lo, hi = parsePrefilter("none")
	if !math.IsNaN(lo) || !math.IsNaN(hi) {
		t.Fatal(lo, hi)
	}
	// The notch of that example is reported, never taken as the mains
	// frequency (a filter setting, not a statement about the grid).
	a := &record.Array{Name: "g", FilterLowHz: 0.1, FilterHighHz: 75, Extra: record.Extra{ExtraEDFPrefilter: "HP:0.1Hz LP:75Hz N:50Hz"}}
	notes := strings.Join(prefilterNotes(a), "\n")
	if !strings.Contains(notes, "notch at 50 Hz; session.power_line_hz is not set from it") || !strings.Contains(notes, "now 0.1 and 75 Hz") {
		t.Errorf("notes:\n%s", notes)
	}
}
