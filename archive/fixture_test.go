package archive

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"muarc/analysis"
	"muarc/deid"
	"muarc/internal/isolate"
	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// The fixture study: synth.TestConfig (one subject, two levels, two 4 x 4
// arrays), written once per test binary as muarc files, de-identified and
// not. Its values are properties of our model, never check values for the
// outside standards.
var (
	fixtureOnce sync.Once
	fixtureDir  string
	fixtureErr  error
)

// fixture returns a folder holding clean/ (two de-identified recordings, one
// in a sub-folder) and identified/ (the same subject, not de-identified).
func fixture(t testing.TB) string {
	t.Helper()
	fixtureOnce.Do(func() {
		fixtureDir, fixtureErr = os.MkdirTemp("", "muarc-archive-fixture-")
		if fixtureErr != nil {
			return
		}
		fixtureErr = makeFixture(fixtureDir)
	})
	if fixtureErr != nil {
		t.Fatal(fixtureErr)
	}
	return fixtureDir
}

func makeFixture(dir string) error {
	cfg := synth.TestConfig()
	gen, err := synth.Generate(cfg)
	if err != nil {
		return err
	}
	key, err := deid.KeyFromBytes([]byte("archive-test-key-0123456789abcdef"))
	if err != nil {
		return err
	}
	now := time.Date(2026, 3, 14, 12, 0, 0, 0, time.UTC)
	for i, g := range gen {
		raw := filepath.Join(dir, "identified", fmt.Sprintf("subject%d.h5", i+1))
		if err := writeRec(raw, g.Recording, now); err != nil {
			return err
		}
		// Derived figures and templates, as muarc stats --write stores them.
		if _, err := analysis.StatsFile(raw, true, true); err != nil {
			return err
		}
		// De-identify a copy read back from the file (Apply changes its
		// argument), then write it twice: at the top and in a sub-folder
		// with a second session id, as a study with two visits.
		rec, err := recfile.ReadAll(raw)
		if err != nil {
			return err
		}
		clean(rec, deid.NewPseudonymizer(key), now)
		if left := deid.IdentifyingFields(rec); len(left) > 0 {
			return fmt.Errorf("fixture still identifying: %v", left)
		}
		if err := writeRec(filepath.Join(dir, "clean", fmt.Sprintf("s%d_a.h5", i+1)), rec, now); err != nil {
			return err
		}
		rec.Session.ID = deid.NewPseudonymizer(key).Session(rec.Subject.ID, "second-visit")
		if err := writeRec(filepath.Join(dir, "clean", "visit2", fmt.Sprintf("s%d_b.h5", i+1)), rec, now); err != nil {
			return err
		}
	}
	return nil
}

// clean blanks what deid.IdentifyingFields looks at, in the fixture's own
// simple way (the deid package's Apply is tested there; here the fixture
// only needs files that pass its check).
func clean(rec *record.Recording, ps *deid.Pseudonymizer, now time.Time) {
	orig := rec.Subject.ID
	rec.Subject.ID = ps.Subject(orig)
	rec.Session.ID = ps.Session(orig, rec.Session.ID)
	s := &rec.Subject
	s.Name, s.Phone, s.Email, s.Notes, s.BirthDate, s.Extra = "", "", "", "", "", nil
	rec.Session.Site, rec.Session.Operator, rec.Session.Notes, rec.Session.Date, rec.Session.Extra = "", "", "", "", nil
	rec.Study.Extra = nil
	for ti := range rec.Trials {
		t := &rec.Trials[ti]
		t.Notes, t.Extra = "", nil
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			a.Extra = nil
			for di := range a.Decompositions {
				a.Decompositions[di].Notes = ""
			}
		}
	}
	rec.Provenance.Sources = nil
	rec.Provenance.History = []record.Operation{{Action: "deidentify", Software: "archive test fixture", Time: now, Details: "{}"}}
}

func writeRec(path string, rec *record.Recording, now time.Time) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	return recfile.Write(path, rec, recfile.WriteOptions{Now: now})
}

func TestMain(m *testing.M) {
	// Worker processes (internal/isolate) are this test binary started
	// again: they serve here and never return.
	isolate.Serve()
	code := m.Run()
	if fixtureDir != "" {
		os.RemoveAll(fixtureDir)
	}
	os.Exit(code)
}

// The fixture's clean files pass the checks pack applies; the identified
// one carries the subject's name (a property of the fixture).
func TestFixtureIsClean(t *testing.T) {
	dir := fixture(t)
	recs, _, err := FindRecordings(filepath.Join(dir, "clean"))
	if err != nil || len(recs) != 2 {
		t.Fatalf("%v %v", recs, err)
	}
	for _, r := range recs {
		n, first, ident, err := checkRecording(filepath.Join(dir, "clean", r))
		if err != nil || n != 0 || len(ident) != 0 {
			t.Fatalf("%s: %d errors %v, identifying %v, %v", r, n, first, ident, err)
		}
	}
	n, first, ident, err := checkRecording(filepath.Join(dir, "identified", "subject1.h5"))
	if err != nil || n != 0 || !strings.Contains(strings.Join(ident, " "), "subject.name") {
		t.Fatalf("identified: %d errors %v, identifying %v, %v", n, first, ident, err)
	}
}
