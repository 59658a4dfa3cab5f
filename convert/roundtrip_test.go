package convert

import (
	"math"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// roundTrip writes rec, exports it with every kind, imports the export
// folder as a study and compares both files with h5py (outside muarc):
// every dataset bit for bit, every attribute, the same names, the history
// kept with the import added.
func roundTrip(t *testing.T, rec *record.Recording, folder string) string {
	t.Helper()
	py := needPython(t)
	dir := t.TempDir()
	orig := filepath.Join(dir, "orig.h5")
	if err := recfile.Write(orig, rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	exp := filepath.Join(dir, folder)
	if _, err := Export(orig, ExportKinds, ExportOptions{Dir: exp}); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out")
	res, err := ImportStudy(exp, out, StudyOptions{})
	if err != nil || len(res) != 1 || res[0].Error != "" {
		t.Fatalf("%v %+v", err, res)
	}
	// The study folder is the recording: the file is named after it, not
	// a hidden "..h5".
	if want := filepath.Join(out, folder+".h5"); res[0].Output != want {
		t.Fatalf("output %q, want %q", res[0].Output, want)
	}
	cmp, err := exec.Command(py, "testdata/compare_recordings.py", orig, res[0].Output).CombinedOutput()
	if err != nil || !strings.HasSuffix(strings.TrimSpace(string(cmp)), "\n0 differences") && strings.TrimSpace(string(cmp)) != "0 differences" {
		t.Fatalf("h5py comparison: %v\n%s", err, cmp)
	}
	return res[0].Output
}

func TestExportImportRoundTripSynth(t *testing.T) {
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	rec := gens[0].Recording
	muaps := 0
	for _, tr := range rec.Trials {
		for _, a := range tr.Arrays {
			for _, d := range a.Decompositions {
				if d.MUAPs != nil {
					muaps++
				}
			}
		}
	}
	if muaps == 0 {
		t.Fatal("the test study has no MUAP templates to carry")
	}
	roundTrip(t, rec, "S01")
}

// A recording with unicode labels, NaN figures and text columns holding
// quotes, delimiters, line breaks, blanks and digits comes back the same.
func TestExportImportRoundTripAwkwardText(t *testing.T) {
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	rec := gens[0].Recording
	rec.Study.Title = "Étude «rampes» – Ωmega ✓"
	rec.Subject.Notes = "said \"fine\", then; left\nsecond line"
	a := &rec.Trials[0].Arrays[0]
	for i := range a.Channels {
		a.Channels[i].Label = "Känal-" + string(rune('α'+i%20)) + "·" + strings.Repeat("é", i%3) + string(rune('0'+i%10)) + "_" + string(rune('A'+i/10))
	}
	d := &a.Decompositions[0]
	texts := []string{`box 3 said "ok" twice`, "two\nlines", "a,b;c\td", "  spaced  ", "", "007", "Müller–Åsa ✓", `""`, "x\r\ny"}
	col := record.Column{Name: "comment"}
	digits := record.Column{Name: "code"}
	for i := range d.Units {
		col.Text = append(col.Text, texts[i%len(texts)])
		digits.Text = append(digits.Text, []string{"007", "12", "3.50"}[i%3])
		if i%2 == 0 {
			d.Units[i].Silhouette = math.NaN()
			d.Units[i].PNRdB = math.NaN()
		}
	}
	d.ExtraColumns = append(d.ExtraColumns, col, digits)
	rec.Provenance.History = append(rec.Provenance.History, record.Operation{Action: "review", Software: "hand «edit»",
		Time: time.Date(2026, 3, 14, 9, 30, 0, 123456789, time.UTC), Details: `{"note":"a \"quoted\", \n multi-line note","z":1,"a":[1,2]}`})
	out := roundTrip(t, rec, "Probe-ä")
	got, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	gd := got.Trials[0].Arrays[0].Decompositions[0]
	for _, c := range gd.ExtraColumns {
		if c.Name == "code" && (c.Text == nil || c.Text[0] != "007") {
			t.Errorf("digits column not kept as text: %+v", c)
		}
	}
}
