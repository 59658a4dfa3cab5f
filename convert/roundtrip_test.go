package convert

import (
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"muarc/analysis"
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
	orig := filepath.Join(t.TempDir(), "orig.h5")
	if err := recfile.Write(orig, rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	return roundTripFile(t, orig, folder)
}

// roundTripFile is roundTrip of a recording already written.
func roundTripFile(t *testing.T, orig, folder string) string {
	t.Helper()
	py := needPython(t)
	dir := t.TempDir()
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

// Derived figures and derived templates (analysis.StatsFile --write) come
// back into derived/ of the same decompositions, bit for bit (h5py), and
// the lab's unit table beside them is unchanged: the export writes them as
// tables of their own, labelled as derived.
func TestExportImportRoundTripDerived(t *testing.T) {
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	orig := filepath.Join(t.TempDir(), "orig.h5")
	if err := recfile.Write(orig, gens[0].Recording, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	if _, err := analysis.StatsFile(orig, true, true); err != nil {
		t.Fatal(err)
	}
	before, err := recfile.ReadAll(orig)
	if err != nil {
		t.Fatal(err)
	}
	derived, templates := 0, 0
	for _, tr := range before.Trials {
		for _, a := range tr.Arrays {
			for _, d := range a.Decompositions {
				if d.Derived != nil {
					derived++
					if d.Derived.MUAPs != nil {
						templates++
					}
				}
			}
		}
	}
	if derived == 0 || templates == 0 {
		t.Fatalf("stats --write stored %d derived groups, %d with templates", derived, templates)
	}
	out := roundTripFile(t, orig, "S01")
	got, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for ti, tr := range got.Trials {
		for ai, a := range tr.Arrays {
			for di, d := range a.Decompositions {
				w := before.Trials[ti].Arrays[ai].Decompositions[di]
				if d.Derived == nil {
					continue
				}
				n++
				if d.Derived.Method != w.Derived.Method || !d.Derived.Computed.Equal(w.Derived.Computed) || d.Derived.Software != w.Derived.Software {
					t.Errorf("%s/%s/%s: derived attributes %q %v %q, want %q %v %q", tr.Name, a.Name, d.Name, d.Derived.Method, d.Derived.Computed,
						d.Derived.Software, w.Derived.Method, w.Derived.Computed, w.Derived.Software)
				}
			}
		}
	}
	if n != derived {
		t.Errorf("%d derived groups came back, want %d", n, derived)
	}
}

// A derived-figures table read back refuses what it cannot place: a unit
// the decomposition does not have, a muarc_id that is not the unit's, a
// table without its "derived:" line.
func TestDerivedUnitsRefused(t *testing.T) {
	d := &record.Decomposition{Name: "auto", Units: []record.Unit{record.NewUnit(1), record.NewUnit(2)}}
	d.Units[0].Label, d.Units[1].Label = "MU-a", "MU-b"
	good := "derived: x\nmethod: {}\n\nunit,muarc_id,recruit_pct_mvc [%],derecruit_pct_mvc [%],recruit_force [N],derecruit_force [N],initial_rate_pps [/s],plateau_rate_pps [/s],plateau_isi_cov [1],plateau_isi_count\n"
	for name, c := range map[string]struct{ text, want string }{
		"ok":          {good + "MU-a,1,1,2,3,4,5,6,0.1,7\nMU-b,2,,,,,,,,0\n", ""},
		"unknown":     {good + "MU-a,1,1,2,3,4,5,6,0.1,7\nMU-c,2,,,,,,,,0\n", "no unit \"MU-c\""},
		"wrong id":    {good + "MU-a,2,1,2,3,4,5,6,0.1,7\nMU-b,2,,,,,,,,0\n", "muarc_id"},
		"missing":     {good + "MU-a,1,1,2,3,4,5,6,0.1,7\n", "no derived figures for unit MU-b"},
		"not derived": {strings.TrimPrefix(good, "derived: x\n") + "MU-a,1,1,2,3,4,5,6,0.1,7\nMU-b,2,,,,,,,,0\n", "not a derived-figures table"},
		"text":        {good + "MU-a,1,one,2,3,4,5,6,0.1,7\nMU-b,2,,,,,,,,0\n", "text \"one\""},
	} {
		p := filepath.Join(t.TempDir(), "derived_units_g_auto.csv")
		if err := os.WriteFile(p, []byte(c.text), 0o644); err != nil {
			t.Fatal(err)
		}
		dv, err := readDerivedUnits(p, d)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", name, err)
		case c.want == "" && (dv.Units[0].PlateauRatePPS != 6 || dv.Units[0].PlateauISIs != 7 || !math.IsNaN(dv.Units[1].RecruitPctMVC) || dv.Method != "{}"):
			t.Errorf("%s: read %+v", name, dv)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%s: error %v, want %q", name, err, c.want)
		}
	}
}

// TestExportFolderIntoNamedFile: `import EXPORT_DIR -o back.h5` writes the
// file back.h5 (it made a folder of that name holding EXPORT_DIR.h5); a
// study of several recordings with an output named like a file is refused
// before anything is written.
func TestExportFolderIntoNamedFile(t *testing.T) {
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	orig := filepath.Join(dir, "orig.h5")
	if err := recfile.Write(orig, gens[0].Recording, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	exp := filepath.Join(dir, "exported")
	if _, err := Export(orig, ExportKinds, ExportOptions{Dir: exp}); err != nil {
		t.Fatal(err)
	}
	back := filepath.Join(dir, "back.H5")
	res, err := ImportStudy(exp, back, StudyOptions{})
	if err != nil || len(res) != 1 || res[0].Error != "" || res[0].Output != back {
		t.Fatalf("%v %+v", err, res)
	}
	if st, err := os.Stat(back); err != nil || !st.Mode().IsRegular() {
		t.Fatalf("%s is not a file: %v", back, err)
	}
	f, err := recfile.Open(back)
	if err != nil {
		t.Fatal(err)
	}
	f.Close()

	study := filepath.Join(dir, "study")
	for _, sub := range []string{"a", "b"} {
		if _, err := Export(orig, ExportKinds, ExportOptions{Dir: filepath.Join(study, sub)}); err != nil {
			t.Fatal(err)
		}
	}
	out := filepath.Join(dir, "study.h5")
	_, err = ImportStudy(study, out, StudyOptions{})
	if err == nil || !strings.Contains(err.Error(), "holds 2 recordings") || !strings.Contains(err.Error(), "give a folder") {
		t.Fatalf("want a refusal naming the 2 recordings, got %v", err)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatalf("%s was made: %v", out, err)
	}
}

// A decomposition that found no units (a header-only discharge file and
// unit table in the export) comes back as a decomposition with no units,
// the whole file equal by h5py. Without its unit table the header-only
// discharge file is refused: zero units and units that never discharged
// are different recordings, and only the table says which.
func TestExportImportRoundTripNoUnits(t *testing.T) {
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	rec := gens[0].Recording
	a := &rec.Trials[0].Arrays[0]
	a.Decompositions = append(a.Decompositions, record.Decomposition{Name: "none_found", Parameters: "{}"})
	out := roundTrip(t, rec, "S01")
	got, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	ga := got.Trials[0].Arrays[0]
	if d := ga.Decompositions[len(ga.Decompositions)-1]; d.Name != "none_found" || len(d.Units) != 0 {
		t.Fatalf("last decomposition %q with %d units, want none_found with 0", d.Name, len(d.Units))
	}

	orig := filepath.Join(t.TempDir(), "orig.h5")
	if err := recfile.Write(orig, rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	exp := filepath.Join(t.TempDir(), "S01")
	if _, err := Export(orig, ExportKinds, ExportOptions{Dir: exp}); err != nil {
		t.Fatal(err)
	}
	units, _ := filepath.Glob(filepath.Join(exp, "*", "units_*_none_found.csv"))
	if len(units) != 1 {
		t.Fatalf("unit tables of none_found: %v", units)
	}
	os.Remove(units[0])
	res, err := ImportStudy(exp, filepath.Join(t.TempDir(), "out"), StudyOptions{})
	if err == nil && (len(res) != 1 || res[0].Error == "") {
		t.Fatalf("imported without the unit table: %+v", res)
	}
	msg := ""
	if err != nil {
		msg = err.Error()
	} else {
		msg = res[0].Error
	}
	if !strings.Contains(msg, "discharges_") || !strings.Contains(msg, "give the decomposition's unit table too (--units)") {
		t.Errorf("refusal: %s", msg)
	}

	// A header line muarc did not write could also be the header of one
	// column per unit (units that never discharged): refused, naming the
	// flag that reads it as a long table, even with the empty unit table.
	exp2 := filepath.Join(t.TempDir(), "S01")
	if _, err := Export(orig, ExportKinds, ExportOptions{Dir: exp2}); err != nil {
		t.Fatal(err)
	}
	dis, _ := filepath.Glob(filepath.Join(exp2, "*", "discharges_*_none_found.csv"))
	if len(dis) != 1 {
		t.Fatalf("discharge files of none_found: %v", dis)
	}
	if err := os.WriteFile(dis[0], []byte("Unit,Time\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	res, err = ImportStudy(exp2, filepath.Join(t.TempDir(), "out"), StudyOptions{})
	msg = ""
	if err != nil {
		msg = err.Error()
	} else if len(res) == 1 {
		msg = res[0].Error
	}
	if !strings.Contains(msg, "read as one column per unit it names units that never discharged") || !strings.Contains(msg, "--shape long") {
		t.Errorf("a header-only file muarc did not write: %q", msg)
	}
}
