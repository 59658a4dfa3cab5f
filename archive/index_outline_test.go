package archive

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"muarc/analysis"
	"muarc/h5"
	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// TestOutlineAgreesWithFullReading: the index's quick reading (outline)
// gives the same summary as the summary of the whole recording model
// (recfile.Open), on generated recordings varied in what the index shows:
// decompositions edited by hand or not, none at all, one without units,
// derived figures stored (as muarc stats --write does), subject figures
// known or not. The full reading is the reference; the agreement is a
// property of our reader, checked value by value through JSON.
func TestOutlineAgreesWithFullReading(t *testing.T) {
	cfg := synth.TestConfig()
	cfg.Subjects = 3
	gen, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	variants := []struct {
		name    string
		change  func(*record.Recording)
		derived bool
	}{
		{"as generated", func(*record.Recording) {}, false},
		{"derived figures", func(*record.Recording) {}, true},
		{"no decomposition edited", func(r *record.Recording) { setEdited(r, -1) }, false},
		{"first decomposition edited", func(r *record.Recording) { setEdited(r, 0) }, true},
		{"no decompositions", func(r *record.Recording) { r.Trials[0].Arrays[0].Decompositions = nil }, false},
		{"a decomposition without units", func(r *record.Recording) {
			for ti := range r.Trials {
				for ai := range r.Trials[ti].Arrays {
					for di := range r.Trials[ti].Arrays[ai].Decompositions {
						d := &r.Trials[ti].Arrays[ai].Decompositions[di]
						d.Units, d.MUAPs, d.ExtraColumns = nil, nil, nil
					}
				}
			}
		}, false},
		{"subject figures known", func(r *record.Recording) {
			r.Subject.AgeYears, r.Subject.HeightCm, r.Subject.MassKg, r.Subject.Sex = 31, 172.5, 68, "female"
		}, false},
	}
	dir := t.TempDir()
	n := 0
	for gi, g := range gen {
		for vi, v := range variants {
			rec, err := recfile.ReadAll(writeTemp(t, dir, g.Recording))
			if err != nil {
				t.Fatal(err)
			}
			v.change(rec)
			path := filepath.Join(dir, fmt.Sprintf("g%d-v%d.h5", gi, vi))
			if err := recfile.Write(path, rec, recfile.WriteOptions{}); err != nil {
				t.Fatalf("%s: %v", v.name, err)
			}
			if v.derived {
				if _, err := analysis.StatsFile(path, true, true); err != nil {
					t.Fatal(err)
				}
			}
			st, _ := os.Stat(path)
			want, err := fullSummary(path, "x.h5", st.Size())
			if err != nil {
				t.Fatal(err)
			}
			hf, err := h5.Open(path)
			if err != nil {
				t.Fatal(err)
			}
			got, err := outline(hf, "x.h5", st.Size())
			hf.Close()
			if err != nil {
				t.Fatalf("%s (recording %d): outline: %v", v.name, gi, err)
			}
			if a, b := summaryJSON(t, got), summaryJSON(t, want); a != b {
				t.Fatalf("%s (recording %d):\noutline %s\nfull    %s", v.name, gi, a, b)
			}
			n++
		}
	}
	t.Logf("%d recordings agree", n)
}

// TestOutlineFallsBack: a file the quick reading does not expect is read
// in full, so its error is the full reading's own.
func TestOutlineFallsBack(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "other.h5")
	f, err := h5.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	root, _ := f.Root()
	root.SetAttr("layout", "another-layout")
	root.Close()
	f.Close()
	_, _, err = readSummary(path, "other.h5", false)
	_, want := fullSummary(path, "other.h5", 0)
	if err == nil || want == nil || err.Error() != want.Error() {
		t.Fatalf("error %v, want the full reading's %v", err, want)
	}
}

func setEdited(r *record.Recording, k int) {
	for ti := range r.Trials {
		for ai := range r.Trials[ti].Arrays {
			for di := range r.Trials[ti].Arrays[ai].Decompositions {
				r.Trials[ti].Arrays[ai].Decompositions[di].EditedByHand = di == k
			}
		}
	}
}

// writeTemp writes rec to a new file under dir (so that each variant
// starts from a copy read back from disk).
func writeTemp(t *testing.T, dir string, rec *record.Recording) string {
	t.Helper()
	f, err := os.CreateTemp(dir, "src-*.h5")
	if err != nil {
		t.Fatal(err)
	}
	f.Close()
	os.Remove(f.Name())
	if err := recfile.Write(f.Name(), rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	return f.Name()
}

func summaryJSON(t *testing.T, s *RecordingSummary) string {
	t.Helper()
	b, err := json.Marshal(struct {
		R     summaryRecord
		Bytes int64
		Age   string
	}{recordOf(s), s.Bytes, fmt.Sprint(s.Subject.AgeYears, math.IsNaN(s.Subject.HeightCm))})
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}
