package convert

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"muarc/edfplus"
	"muarc/recfile"
	"muarc/record"
)

// edfHeader reads the header of an EDF/BDF file.
func edfHeader(t *testing.T, path string) *edfplus.Header {
	t.Helper()
	r, err := edfplus.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	return r.Header
}

// gridProfile maps the EDFlib fixture's two EMG signals to two arrays.
func gridProfile() *Profile {
	prof := DefaultProfile()
	prof.EDF = ProfileEDF{Arrays: map[string][]string{"grid_a": {"EMG r1c1"}, "grid_b": {"EMG r1c2"}}}
	return prof
}

// onsetAt is the EDFlib onset (units of 100 us) of sample k of the 256 Hz
// signal; k a multiple of 16 gives a whole number.
func onsetAt(k int) string { return fmt.Sprint(k * 10000 / 256) }

// TestEDFUnitLabelsAsWritten: discharge annotations written by EDFlib
// (Debian libedf-dev) in the form "discharge ARRAY/DECOMPOSITION unit
// LABEL" give units whose labels are the text as written, numbered 1..N in
// order of first appearance; digits in a label never become its id.
func TestEDFUnitLabelsAsWritten(t *testing.T) {
	dir := t.TempDir()
	// EDFlib cuts annotation texts at 40 bytes (EDFLIB_WRITE_MAX_ANNOTATION_LEN).
	labels := []string{"MU 7", "07", "1.5", "MU 7", "2.0", "µ-Ein ✓", "07"}
	var lines []string
	for i, l := range labels {
		lines = append(lines, onsetAt(16*(i+1))+"\tdischarge grid_a/auto unit "+l)
	}
	path := edflibFixture(t, dir, "bdf", lines...)
	out := filepath.Join(dir, "r.h5")
	rep, err := ImportRecording(Inputs{EMG: []string{path}, Profile: gridProfile(), Dir: dir}, out, recfile.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	rec, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	d := rec.Trials[0].Arrays[0].Decompositions
	if len(d) != 1 || d[0].Name != "auto" {
		t.Fatalf("decompositions %+v", d)
	}
	// Expected from the list above: first appearances in order, with the
	// sample numbers 16, 32, ... of each line.
	want := []struct {
		label string
		ks    []int64
	}{{"MU 7", []int64{16, 64}}, {"07", []int64{32, 112}}, {"1.5", []int64{48}}, {"2.0", []int64{80}}, {"µ-Ein ✓", []int64{96}}}
	if len(d[0].Units) != len(want) {
		t.Fatalf("%d units, want %d: %+v", len(d[0].Units), len(want), d[0].Units)
	}
	for i, w := range want {
		u := d[0].Units[i]
		if u.ID != int64(i+1) || u.Label != w.label || !equalInts(u.Discharges, w.ks) {
			t.Errorf("unit %d: id %d label %q discharges %v, want id %d %q %v", i, u.ID, u.Label, u.Discharges, i+1, w.label, w.ks)
		}
	}
	if rep.Files[0].Discharges != len(labels) {
		t.Errorf("report says %d discharges", rep.Files[0].Discharges)
	}
}

// TestEDFAnnotationReadings: annotation texts that could be read two ways
// are refused naming both readings; edf.annotations: notes keeps them all
// as text.
func TestEDFAnnotationReadings(t *testing.T) {
	for _, c := range []struct {
		text string
		want []string
	}{
		{"discharge grid_a/auto unit  MU 7", []string{`" MU 7" (as written)`, `"MU 7" (blanks at its edges left out)`}},
		{"discharge grid_a/auto unit MU 7 ", []string{`"MU 7 " (as written)`, `"MU 7"`}},
		{"Discharge grid_a unit 3", []string{"a unit or a discharge in a form muarc does not read", "a note", "edf.annotations: notes"}},
		{"discharges of grid_a/auto: 3", []string{"a note"}},
		{"unit grid_a/auto id x: MU", []string{"a note"}},
		{"discharge grid_a/auto id 4", []string{"unit id 4 of grid_a/auto is not declared", "unit LABEL"}},
	} {
		dir := t.TempDir()
		path := edflibFixture(t, dir, "bdf", onsetAt(16)+"\t"+c.text)
		_, err := ImportRecording(Inputs{EMG: []string{path}, Profile: gridProfile(), Dir: dir}, filepath.Join(dir, "r.h5"), recfile.WriteOptions{})
		if err == nil {
			t.Errorf("%q: accepted", c.text)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%q: %v\n  does not say %q", c.text, err, w)
			}
		}
		if _, serr := os.Stat(filepath.Join(dir, "r.h5")); serr == nil {
			t.Errorf("%q: an output was written", c.text)
		}
		// Read as notes, every text is kept as written.
		prof := gridProfile()
		prof.EDF.Annotations = EDFAnnotationsNotes
		out := filepath.Join(dir, "notes.h5")
		if _, err := ImportRecording(Inputs{EMG: []string{path}, Profile: prof, Dir: dir}, out, recfile.WriteOptions{}); err != nil {
			t.Fatalf("%q as notes: %v", c.text, err)
		}
		rec, err := recfile.ReadAll(out)
		if err != nil {
			t.Fatal(err)
		}
		var kept []edfAnnotation
		json.Unmarshal([]byte(rec.Trials[0].Extra[ExtraEDFAnnotations].(string)), &kept)
		found := false
		for _, k := range kept {
			found = found || k.Text == c.text
		}
		if !found || len(rec.Trials[0].Arrays[0].Decompositions) != 0 {
			t.Errorf("%q as notes: kept %+v", c.text, kept)
		}
	}
	// Two declared units with one label: a discharge named by that label
	// has two readings.
	dir := t.TempDir()
	path := edflibFixture(t, dir, "bdf", "0\tunit grid_a/auto id 1: MU", "0\tunit grid_a/auto id 2: MU", onsetAt(32)+"\tdischarge grid_a/auto unit MU")
	_, err := ImportRecording(Inputs{EMG: []string{path}, Profile: gridProfile(), Dir: dir}, filepath.Join(dir, "r.h5"), recfile.WriteOptions{})
	if err == nil || !strings.Contains(err.Error(), "could be unit id 1 or unit id 2") {
		t.Errorf("shared label: %v", err)
	}
}

// TestEDFRoundTripNamesAndLabels: muarc -> BDF+ -> muarc gives the trial
// its name back (recording field, or an annotation when the name does not
// fit), and every unit its id, its label as written (empty, blanks,
// unicode) and its discharges, also a unit without discharges.
func TestEDFRoundTripNamesAndLabels(t *testing.T) {
	dir := t.TempDir()
	_, rec := deidentifiedSynth(t, dir)
	long := "ramp_30pct_second_block_after_the_fatigue_protocol_of_the_afternoon"
	rec.Trials = rec.Trials[:2]
	rec.Trials[1].Name = long
	d := &rec.Trials[0].Arrays[0].Decompositions[0]
	relabel := []string{"", " MU 2 ", "1.5", "µ ✓ \"q\", x"}
	for i := range d.Units {
		d.Units[i].Label = relabel[i%len(relabel)]
	}
	silent := record.NewUnit(40)
	silent.Label = "no discharges"
	d.Units = append(d.Units, silent)
	d.MUAPs = nil // templates do not go to EDF
	for i := range d.ExtraColumns {
		if c := &d.ExtraColumns[i]; c.Text != nil {
			c.Text = append(c.Text, "")
		} else {
			c.Values = append(c.Values, math.NaN())
		}
	}
	src := filepath.Join(dir, "src.h5")
	if err := recfile.Write(src, rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	reps, err := ExportEDF(src, EDFExportOptions{Format: edfplus.BDF, Dir: filepath.Join(dir, "bdf")})
	if err != nil {
		t.Fatal(err)
	}
	for ti, rp := range reps {
		ot := rec.Trials[ti]
		h := edfHeader(t, rp.File)
		// EDF+ 2.1.3.3: the recording field holds at most 80 characters.
		inField := strings.Contains(h.Recording, " muarc_trial="+ot.Name)
		if len(h.Recording) > 80 || inField == (ot.Name == long) {
			t.Errorf("recording field %q for trial %s", h.Recording, ot.Name)
		}
		back := filepath.Join(dir, fmt.Sprintf("back%d.h5", ti))
		// One file, no metadata: the import's own default would be "trial_1".
		if _, err := ImportRecording(Inputs{EMG: []string{rp.File}}, back, recfile.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
		got, err := recfile.ReadAll(back)
		if err != nil {
			t.Fatal(err)
		}
		gt := got.Trials[0]
		if gt.Name != ot.Name {
			t.Errorf("trial %q back, wrote %q", gt.Name, ot.Name)
		}
		if _, ok := gt.Extra[ExtraEDFAnnotations]; ok {
			t.Errorf("trial %s: annotations left over as notes: %v", ot.Name, gt.Extra[ExtraEDFAnnotations])
		}
		for ai, oa := range ot.Arrays {
			for _, od := range oa.Decompositions {
				gd := decompNamed(&gt.Arrays[ai], od.Name)
				if len(gd.Units) != len(od.Units) {
					t.Fatalf("%s/%s: %d units back, wrote %d", oa.Name, od.Name, len(gd.Units), len(od.Units))
				}
				for ui, u := range od.Units {
					g := gd.Units[ui]
					if g.ID != u.ID || g.Label != u.Label || !equalInts(g.Discharges, u.Discharges) {
						t.Errorf("%s/%s unit %d: id %d label %q %d discharges back, wrote id %d %q %d", oa.Name, od.Name, ui, g.ID, g.Label, len(g.Discharges), u.ID, u.Label, len(u.Discharges))
					}
				}
			}
		}
	}
}

// TestEDFFilesOfSeveralTrials: the files of several trials given at once,
// without metadata, each go to the trial they record.
func TestEDFFilesOfSeveralTrials(t *testing.T) {
	dir := t.TempDir()
	src, rec := deidentifiedSynth(t, dir)
	reps, err := ExportEDF(src, EDFExportOptions{Format: edfplus.BDF, Dir: filepath.Join(dir, "bdf")})
	if err != nil {
		t.Fatal(err)
	}
	var files []string
	for _, r := range reps {
		files = append(files, r.File)
	}
	out := filepath.Join(dir, "all.h5")
	if _, err := ImportRecording(Inputs{EMG: files}, out, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	got, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Trials) != len(rec.Trials) {
		t.Fatalf("%d trials back, wrote %d", len(got.Trials), len(rec.Trials))
	}
	for i := range rec.Trials {
		if got.Trials[i].Name != rec.Trials[i].Name || len(got.Trials[i].Arrays) != len(rec.Trials[i].Arrays) {
			t.Errorf("trial %d: %q with %d arrays back, wrote %q with %d", i, got.Trials[i].Name, len(got.Trials[i].Arrays), rec.Trials[i].Name, len(rec.Trials[i].Arrays))
		}
	}
}

// TestEDFTrialNameConflict: a trial name from the file name template that
// differs from the one the file records is refused naming both, unless the
// profile's edf.trial picks one.
func TestEDFTrialNameConflict(t *testing.T) {
	dir := t.TempDir()
	src, rec := deidentifiedSynth(t, dir)
	reps, err := ExportEDF(src, EDFExportOptions{Format: edfplus.BDF, Dir: filepath.Join(dir, "bdf")})
	if err != nil {
		t.Fatal(err)
	}
	recorded := rec.Trials[0].Name
	renamed := filepath.Join(dir, "in", "other_name", "grid.bdf")
	os.MkdirAll(filepath.Dir(renamed), 0o755)
	b, _ := os.ReadFile(reps[0].File)
	os.WriteFile(renamed, b, 0o644)
	for _, c := range []struct {
		mode, trial string
	}{{"", ""}, {EDFTrialRecorded, recorded}, {EDFTrialGiven, "other_name"}} {
		prof := DefaultProfile()
		prof.Files.EMG = "{trial}/{array}.bdf"
		prof.EDF.Trial = c.mode
		out := filepath.Join(dir, "out"+c.mode+".h5")
		_, err := ImportRecording(Inputs{EMG: []string{renamed}, Profile: prof, Dir: filepath.Join(dir, "in")}, out, recfile.WriteOptions{})
		if c.trial == "" {
			if err == nil || !strings.Contains(err.Error(), `"other_name" from the file name`) || !strings.Contains(err.Error(), fmt.Sprintf("%q recorded in the file", recorded)) || !strings.Contains(err.Error(), "edf.trial") {
				t.Errorf("conflict: %v", err)
			}
			continue
		}
		if err != nil {
			t.Fatalf("edf.trial %s: %v", c.mode, err)
		}
		got, err := recfile.ReadAll(out)
		if err != nil {
			t.Fatal(err)
		}
		if got.Trials[0].Name != c.trial {
			t.Errorf("edf.trial %s: trial %q, want %q", c.mode, got.Trials[0].Name, c.trial)
		}
	}
}

// FuzzEDFUnitAnnotations reads two fuzzed annotation texts on an array of
// 100 samples: no panic; an accepted text is a unit, a discharge or a note,
// and every label stored is a substring of a text as written.
func FuzzEDFUnitAnnotations(f *testing.F) {
	for _, s := range [][2]string{
		{"unit a/d id 3: MU 7", "discharge a/d id 3"},
		{"discharge a/d unit MU 7", "discharge a/d unit 07"},
		{"discharge a/d unit  x", "Discharge a"},
		{"unit a/d id -1:", "discharge a/d id -1"},
		{"unit a/d id 1: x", "unit a/d id 1: y"},
		{"discharge b/d unit 1", "note"},
	} {
		f.Add(s[0], s[1], 0.25)
	}
	f.Fuzz(func(t *testing.T, t1, t2 string, onset float64) {
		tr := &record.Trial{Arrays: []record.Array{{Name: "a", SamplingRateHz: 100,
			Samples: &record.MemSamples{Samples: 100, Channels: 1, F64: make([]float64, 100)}}}}
		anns := []edfplus.Annotation{{OnsetS: 0, Text: t1, OnsetText: "+0"}, {OnsetS: onset, Text: t2, OnsetText: "+x"}}
		pl := &Plan{Rec: &record.Recording{}, Report: &Report{}}
		rest, n, err := pl.edfUnits(input{path: "f.bdf"}, tr, anns, "")
		if err != nil {
			return
		}
		units := 0
		for _, d := range tr.Arrays[0].Decompositions {
			for _, u := range d.Units {
				units++
				if !strings.Contains(t1, u.Label) && !strings.Contains(t2, u.Label) {
					t.Fatalf("label %q is in no text", u.Label)
				}
			}
		}
		if len(rest)+n > 2 || n > 0 && units == 0 {
			t.Fatalf("%d notes, %d discharges, %d units from two texts", len(rest), n, units)
		}
	})
}
