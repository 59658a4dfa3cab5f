package validate

import (
	"path/filepath"
	"testing"

	"muarc/recfile"
	"muarc/synth"
)

// TestSyntheticRecordingsHaveNoErrors: the generator's recordings (several
// trials, two arrays, automatic and hand-edited decompositions, MUAPs, a bad
// channel) are good files: no error and nothing unreadable. Warnings for
// low-confidence units are expected, since the generator models detection
// errors; the report must still name them by unit.
func TestSyntheticRecordingsHaveNoErrors(t *testing.T) {
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for i, g := range gens {
		p := filepath.Join(dir, g.Recording.Subject.ID+".h5")
		if err := recfile.Write(p, g.Recording, recfile.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
		r := File(p, DefaultOptions())
		if r.Failed() {
			t.Fatalf("recording %d: %s %v", i, r.ReadError, r.Findings)
		}
		for _, f := range r.Findings {
			switch f.Check {
			case "quality.silhouette", "quality.pnr", "discharge.doublet", "discharge.few":
			default:
				t.Errorf("unexpected finding on a generated recording: %v", f)
			}
		}
	}
}
