package deid

import (
	"encoding/json"
	"muarc/internal/reftest"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"muarc/internal/batch"
	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
	"muarc/validate"
)

// needPython returns /usr/bin/python3 when h5py imports there. Without it
// the test skips, or fails when CI is set.
func needPython(t *testing.T) string { return reftest.NeedPython(t, "h5py", "numpy") }

var (
	genOnce sync.Once
	genRec  *record.Recording
	genErr  error
)

// generated is one invented recording of the test generator (with a name,
// birth date, phone, e-mail, notes and operator of an invented person).
func generated(t *testing.T) *record.Recording {
	t.Helper()
	genOnce.Do(func() {
		g, err := synth.Generate(synth.TestConfig())
		if err != nil {
			genErr = err
			return
		}
		genRec = g[0].Recording
	})
	if genErr != nil {
		t.Fatal(genErr)
	}
	return genRec
}

// studyDir writes two sessions of the generated subject (the second 17 days
// later, another session id) into a source folder named after the subject.
func studyDir(t *testing.T) (src string, rec *record.Recording) {
	t.Helper()
	rec = generated(t)
	root := t.TempDir()
	src = filepath.Join(root, "originals", rec.Subject.Name)
	if err := os.MkdirAll(src, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := recfile.Write(filepath.Join(src, "visit1.h5"), rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	second := *rec
	second.Session.ID = rec.Session.ID + "b"
	d, _ := ShiftDate(rec.Session.Date, 17)
	second.Session.Date = d
	if err := recfile.Write(filepath.Join(src, "visit2.h5"), &second, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	return src, rec
}

func TestDeidentifyStudyFiles(t *testing.T) {
	src, rec := studyDir(t)
	out := filepath.Join(filepath.Dir(filepath.Dir(src)), "shared")
	key, _ := KeyFromBytes([]byte("0123456789abcdef0123456789abcdef"))
	link := filepath.Join(filepath.Dir(out), "linkage.json")
	rep, err := DeidentifyStudy(src, out, StudyOptions{Key: key, Workers: 2, Linkage: link})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Written != 2 || rep.Failed != 0 {
		b, _ := json.MarshalIndent(rep.Files, "", " ")
		t.Fatalf("written %d failed %d\n%s", rep.Written, rep.Failed, b)
	}
	ps := NewPseudonymizer(key)
	subj := ps.Subject(rec.Subject.ID)
	var outs []string
	for _, f := range rep.Files {
		if !strings.HasPrefix(f.Output, subj+"_"+SessionPrefix) || f.Scan == nil || len(f.Scan.Leaks) != 0 || f.DataChecked < 5 {
			t.Errorf("file %+v", f)
		}
		outs = append(outs, filepath.Join(out, f.Output))
	}
	// The originals hold the identifying values the outputs must not.
	needles := []string{rec.Subject.Name, rec.Subject.Email, rec.Subject.BirthDate, rec.Session.Date[:10], rec.Session.Operator}
	if l, _ := ScanBytes(filepath.Join(src, "visit1.h5"), needles); len(l) < 4 {
		t.Fatalf("the original should hold the values: %v", l)
	}
	var dates []string
	for _, o := range outs {
		if l, err := ScanBytes(o, needles); err != nil || len(l) != 0 {
			t.Errorf("%s leaks %v %v", o, l, err)
		}
		b, _ := os.ReadFile(o)
		if strings.Contains(string(b), src) || strings.Contains(string(b), "/tmp/") {
			t.Errorf("%s holds an absolute path", o)
		}
		r, err := recfile.ReadAll(o)
		if err != nil {
			t.Fatal(err)
		}
		if got := IdentifyingFields(r); len(got) != 0 {
			t.Errorf("still identifying: %v", got)
		}
		h := r.Provenance.History[len(r.Provenance.History)-1]
		if h.Action != "deidentify" || !strings.Contains(h.Details, Default().SHA256()) || !strings.Contains(h.Details, key.Fingerprint()) || strings.Contains(h.Details, "0123456789abcdef") {
			t.Errorf("history %+v", h)
		}
		dates = append(dates, r.Session.Date)
	}
	// The interval between the two sessions survives the shift.
	a, _ := parseDate(dates[0])
	b, _ := parseDate(dates[1])
	if d := b.t.Sub(a.t); d != 17*24*time.Hour && d != -17*24*time.Hour {
		t.Errorf("interval %v, want 17 days", d)
	}
	// Linkage: mode 0600, holds the original id.
	fi, err := os.Stat(link)
	if err != nil || fi.Mode().Perm() != 0o600 {
		t.Fatalf("linkage %v %v", fi, err)
	}
	lb, _ := os.ReadFile(link)
	if !strings.Contains(string(lb), `"subject_id": "`+rec.Subject.ID+`"`) || !strings.Contains(string(lb), subj) {
		t.Errorf("linkage %s", lb)
	}
	if rep.KAnonymity == nil || rep.KAnonymity.Subjects != 1 || rep.KAnonymity.Smallest != 1 {
		t.Errorf("k-anonymity %+v", rep.KAnonymity)
	}
	// A second run refuses to overwrite.
	rep2, err := DeidentifyStudy(src, out, StudyOptions{Key: key})
	if err != nil || rep2.Failed != 2 || !strings.Contains(rep2.Files[0].Error, "exists") {
		t.Errorf("second run: %v %+v", err, rep2)
	}
	// The linkage file is refused inside the output folder.
	if _, err := DeidentifyStudy(src, out, StudyOptions{Key: key, Linkage: filepath.Join(out, "l.json"), Overwrite: true}); err == nil {
		t.Error("linkage inside the output folder accepted")
	}
}

// TestBitExactAgainstH5py: h5py (a general-purpose HDF5 reader) hashes the
// values of every data dataset of an original and of its de-identified copy
// (numpy's tobytes: the values' bits); the hashes must agree.
func TestBitExactAgainstH5py(t *testing.T) {
	py := needPython(t)
	src, _ := studyDir(t)
	out := filepath.Join(t.TempDir(), "out.h5")
	key, _ := KeyFromBytes(make([]byte, 32))
	rep, err := DeidentifyFile(filepath.Join(src, "visit1.h5"), out, StudyOptions{Key: key})
	if err != nil || rep.Written != 1 {
		t.Fatalf("%v %+v", err, rep.Files)
	}
	script := `
import sys, json, hashlib, h5py
def sums(path):
    out = {}
    with h5py.File(path, "r") as f:
        def visit(name, obj):
            if isinstance(obj, h5py.Dataset) and name.startswith("trials/") and obj.dtype.kind in "fiu":
                out[name] = hashlib.sha256(obj[()].tobytes()).hexdigest()
        f.visititems(visit)
    return out
print(json.dumps([sums(sys.argv[1]), sums(sys.argv[2])]))
`
	b, err := exec.Command(py, "-c", script, filepath.Join(src, "visit1.h5"), out).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, b)
	}
	var sums [2]map[string]string
	if err := json.Unmarshal(b, &sums); err != nil {
		t.Fatal(err, string(b))
	}
	if len(sums[0]) < 10 {
		t.Fatalf("only %d datasets: %v", len(sums[0]), sums[0])
	}
	kinds := map[string]bool{}
	for k, v := range sums[0] {
		if sums[1][k] != v {
			t.Errorf("%s differs", k)
		}
		kinds[filepath.Base(k)] = true
	}
	for _, k := range []string{"samples", "force", "discharges", "discharge_offsets", "pnr_db", "silhouette", "muaps"} {
		if !kinds[k] {
			t.Errorf("no %s dataset compared (%v)", k, kinds)
		}
	}
	if len(sums[1]) != len(sums[0]) {
		t.Errorf("%d datasets in the output, %d in the input", len(sums[1]), len(sums[0]))
	}
}

// TestInPlaceEditLeaks: rewriting the name attribute in place with h5py (a
// copy of the original) leaves the old name's bytes in the file, where the
// raw scan finds them; muarc's fresh output does not hold them.
func TestInPlaceEditLeaks(t *testing.T) {
	py := needPython(t)
	src, rec := studyDir(t)
	dir := t.TempDir()
	cp := filepath.Join(dir, "edited.h5")
	b, _ := os.ReadFile(filepath.Join(src, "visit1.h5"))
	os.WriteFile(cp, b, 0o644)
	script := `
import sys, h5py
with h5py.File(sys.argv[1], "r+") as f:
    g = f["subject"]
    del g.attrs["name"]
    g.attrs["name"] = "REMOVED"
    for k in ("email", "phone", "notes", "birth_date"):
        if k in g.attrs:
            del g.attrs[k]
with h5py.File(sys.argv[1], "r") as f:
    print(f["subject"].attrs["name"], "email" in f["subject"].attrs)
`
	outb, err := exec.Command(py, "-c", script, cp).CombinedOutput()
	if err != nil || strings.TrimSpace(string(outb)) != "REMOVED False" {
		t.Fatalf("h5py edit: %v %s", err, outb)
	}
	needles := []string{rec.Subject.Name, rec.Subject.Email}
	leaks, err := ScanBytes(cp, needles)
	if err != nil {
		t.Fatal(err)
	}
	if len(leaks) == 0 {
		t.Fatal("the edited copy should still hold the old name's bytes")
	}
	key, _ := KeyFromBytes(make([]byte, 32))
	out := filepath.Join(dir, "fresh.h5")
	if _, err := DeidentifyFile(filepath.Join(src, "visit1.h5"), out, StudyOptions{Key: key}); err != nil {
		t.Fatal(err)
	}
	if leaks, _ := ScanBytes(out, needles); len(leaks) != 0 {
		t.Fatalf("muarc's output leaks: %v", leaks)
	}
	// CheckFile against the original says the same.
	c, err := CheckFile(cp, CheckOptions{Original: filepath.Join(src, "visit1.h5")})
	if err != nil || c.OK() || len(c.Leaks) == 0 {
		t.Fatalf("check of the edited copy: %v %+v", err, c)
	}
	c, err = CheckFile(out, CheckOptions{Original: filepath.Join(src, "visit1.h5")})
	if err != nil || !c.OK() {
		t.Fatalf("check of muarc's output: %v %+v", err, c)
	}
}

func TestDryRunWritesNothing(t *testing.T) {
	src, _ := studyDir(t)
	out := filepath.Join(t.TempDir(), "never")
	key, _ := KeyFromBytes(make([]byte, 32))
	rep, err := DeidentifyStudy(src, out, StudyOptions{Key: key, DryRun: true, Linkage: filepath.Join(t.TempDir(), "l.json")})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatal("dry run made the output folder")
	}
	if len(rep.Plan) < len(policyPaths()) || rep.Written != 0 || len(rep.Files) != 2 || len(rep.Files[0].Fields) == 0 {
		t.Fatalf("plan %d lines, files %+v", len(rep.Plan), rep.Files)
	}
	found := false
	for _, l := range rep.Plan {
		if l.Path == "subject.name" && l.Action == "drop" {
			found = true
		}
	}
	if !found {
		t.Error("plan lacks subject.name")
	}
}

// TestShards: the two shards of a study write disjoint halves that together
// are the whole (batch.Shard's rule), each saying it saw part of the study.
func TestShards(t *testing.T) {
	src, _ := studyDir(t)
	out := filepath.Join(t.TempDir(), "shared")
	key, _ := KeyFromBytes(make([]byte, 32))
	var names []string
	for i := 1; i <= 2; i++ {
		rep, err := DeidentifyStudy(src, out, StudyOptions{Key: key, Shard: batch.Shard{I: i, N: 2}})
		if err != nil || rep.Written != 1 || rep.Shard == "" || len(rep.Notes) == 0 {
			t.Fatalf("shard %d: %v %+v", i, err, rep)
		}
		names = append(names, rep.Files[0].Output)
	}
	entries, _ := os.ReadDir(out)
	if len(entries) != 2 || names[0] == names[1] {
		t.Fatalf("outputs %v, entries %d", names, len(entries))
	}
}

// TestOutputsValidate: de-identified files pass muarc validate (JSON Schema
// of the metadata view via gojsonschema, structure, content) with no error:
// year-only birth dates, shifted dates, bands and the session year are valid values.
func TestOutputsValidate(t *testing.T) {
	src, _ := studyDir(t)
	out := filepath.Join(t.TempDir(), "shared")
	key, _ := KeyFromBytes(make([]byte, 32))
	pol, _ := ParsePolicy([]byte(`{"name":"y","base":"muarc-safe-harbor-1","fields":{"session.date":"year","trials[].notes":"scrub"}}`), "y.json")
	for _, p := range []*Policy{nil, pol} {
		os.RemoveAll(out)
		rep, err := DeidentifyStudy(src, out, StudyOptions{Key: key, Policy: p})
		if err != nil || rep.Written != 2 {
			t.Fatalf("%v %+v", err, rep)
		}
		for _, f := range rep.Files {
			v := validate.File(filepath.Join(out, f.Output), validate.DefaultOptions())
			if n := v.Count(validate.Error); n != 0 {
				t.Errorf("%s: %d validation errors: %+v", f.Output, n, v.Findings)
			}
			// The bands and the session year are listed fields (since
			// layout 1.2), read back as such, not as extra attributes.
			r, err := recfile.Open(filepath.Join(out, f.Output))
			if err != nil {
				t.Fatal(err)
			}
			s, e := r.Recording().Subject, r.Recording().Session
			r.Close()
			if s.HeightBandCm == "" || s.MassBandKg == "" || s.Extra["height_band_cm"] != nil || (p != nil) != (e.DateYear != 0) || e.Extra["date_year"] != nil {
				t.Errorf("%s: bands %q %q, year %d, extras %v %v", f.Output, s.HeightBandCm, s.MassBandKg, e.DateYear, s.Extra, e.Extra)
			}
		}
	}
}

// TestCheckPatterns: without the original, --check still finds e-mail
// addresses, URLs, IP addresses and absolute paths in the metadata.
func TestCheckPatterns(t *testing.T) {
	rec := *generated(t)
	rec.Trials = append([]record.Trial(nil), rec.Trials...)
	rec.Trials[0].Notes = "uploaded from 10.1.2.3, see https://lab.example.net/x"
	rec.Provenance.History = []record.Operation{{Action: "import", Software: "muarc", Time: time.Date(2026, 3, 3, 0, 0, 0, 0, time.UTC), Details: `{"dir":"/home/lab/raw/s01"}`}}
	path := filepath.Join(t.TempDir(), "x.h5")
	if err := recfile.Write(path, &rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	c, err := CheckFile(path, CheckOptions{Needles: []string{rec.Subject.Name, "2026-03-02"}})
	if err != nil {
		t.Fatal(err)
	}
	got := strings.Join(c.Patterns, "|")
	for _, want := range []string{"subject.email: e-mail address", "trials[0].notes: URL", "trials[0].notes: IP address", "provenance.history[0].details: absolute path"} {
		if !strings.Contains(got, want) {
			t.Errorf("pattern %q missing from %s", want, got)
		}
	}
	if len(c.Leaks) == 0 || c.OK() || c.Searched < 10 {
		t.Errorf("needles: %+v", c)
	}
}

// TestPreconditionsBeforeWriting: a linkage file whose folder does not exist
// is refused before anything is written (the output folder is not even
// made), and a dry run reports an output that already exists as the real
// run would.
func TestPreconditionsBeforeWriting(t *testing.T) {
	src, _ := studyDir(t)
	root := t.TempDir()
	out := filepath.Join(root, "shared")
	key, _ := KeyFromBytes(make([]byte, 32))
	_, err := DeidentifyStudy(src, out, StudyOptions{Key: key, Linkage: filepath.Join(root, "missing", "link.json")})
	if err == nil || !strings.Contains(err.Error(), "does not exist") {
		t.Fatalf("linkage in a missing folder: %v", err)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatalf("output folder made before the linkage folder was checked: %v", err)
	}
	rep, err := DeidentifyStudy(src, out, StudyOptions{Key: key})
	if err != nil || rep.Written != 2 {
		t.Fatalf("%v %+v", err, rep)
	}
	dry, err := DeidentifyStudy(src, out, StudyOptions{Key: key, DryRun: true})
	if err != nil || dry.Failed != 2 || !strings.Contains(dry.Files[0].Error, "exists") {
		t.Fatalf("dry run over existing outputs: %v %+v", err, dry)
	}
}

// TestScanInsideTokens: an identifier glued to digits, letters of another
// case or underscores is found (a channel label from an EMG header); one
// inside an ordinary word is not.
func TestScanInsideTokens(t *testing.T) {
	needles := []string{"Hallbeck", "5520917"}
	for text, want := range map[string]bool{
		"Hallbeck01": true, "S01Hallbeck": true, "AnnaHallbeck": true, "hallbeck_s01": true,
		"MRN5520917": true, "HALLBECK": true, "Hallbecks": false, "xhallbeck": false, "155209170": false,
	} {
		if got := len(scanText(text, needles)) > 0; got != want {
			t.Errorf("%q: found %v, want %v", text, got, want)
		}
	}
	if ordinary("Hallbeck") || !ordinary("Hand") || !ordinary("mass") || !ordinary("edited") {
		t.Error("ordinary words: Hand, mass and edited are; Hallbeck is not")
	}
}
