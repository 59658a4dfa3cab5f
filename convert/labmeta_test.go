package convert

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// A small study of a lab's own files, written by hand: one "key: value"
// file per recording, one subjects table, signal files. The values are
// invented; what is checked is that each lands in its registry field
// unchanged (or converted by an exact factor where asked).
const labProfile = `name: test-lab
lab_metadata:
  file: info.txt
  subjects: subjects.csv
  subject_key: ID
  fields:
    Participant: subject.id
    Recording date: session.date
    Room: session.site
    Sex: subject.sex
    Age: subject.age_years
    Dominant hand: subject.dominant_side
    Height: subject.height_cm
    Protocol: session.extra.protocol
  values:
    subject.sex: {F: female, M: male, "?": ""}
    subject.dominant_side: {R: right, L: left}
`

const labSubjects = "ID,Sex,Age,Dominant hand,Height (cm),Name\nP01,F,34,R,168,Ann Example\nP02,M,41,L,181.5,Bob Example\nP03,?,29,R,,Cat Example\n"

func writeLabStudy(t *testing.T, profile, subjects string, infos map[string]string) (string, *Profile) {
	t.Helper()
	dir := t.TempDir()
	must := func(p, s string) {
		t.Helper()
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	var force strings.Builder
	force.WriteString("sampling rate: 100 Hz\nforce\n")
	for i := 0; i < 10; i++ {
		force.WriteString("1.5\n")
	}
	for rec, info := range infos {
		must(filepath.Join(dir, rec, "info.txt"), info)
		must(filepath.Join(dir, rec, "ramp", "force.csv"), force.String())
	}
	if subjects != "" {
		must(filepath.Join(dir, "subjects.csv"), subjects)
	}
	must(filepath.Join(dir, "lab.yaml"), profile)
	prof, err := LoadProfile(filepath.Join(dir, "lab.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	return dir, prof
}

func TestLabMetadataStudy(t *testing.T) {
	dir, prof := writeLabStudy(t, labProfile, labSubjects, map[string]string{
		"P01_v1": "Participant: P01\nRecording date: 2026-03-14\nRoom: lab room 2\nProtocol: ramp v2\nOperator notes: fine\n",
		"P03_v1": "Participant: P03\nRecording date: 2026-03-16\n",
	})
	out := t.TempDir()
	res, err := ImportStudy(dir, out, StudyOptions{Profile: prof, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(res) != 2 || res[0].Error != "" || res[1].Error != "" {
		t.Fatalf("results %+v", res)
	}
	recs, err := FindRecordings(dir, prof)
	if err != nil {
		t.Fatal(err)
	}
	recs[0].Inputs.subjects = nil
	recs[0].Inputs.Subjects = filepath.Join(dir, "subjects.csv")
	pl, err := Read(recs[0].Inputs)
	if err != nil {
		t.Fatal(err)
	}
	pl.Close()
	s, se := pl.Rec.Subject, pl.Rec.Session
	// Each value as the files above write it, in the registry's words.
	if s.ID != "P01" || s.Sex != "female" || s.DominantSide != "right" || s.AgeYears != 34 || s.HeightCm != 168 {
		t.Errorf("subject %+v", s)
	}
	if se.Date != "2026-03-14" || se.Site != "lab room 2" || se.Extra["protocol"] != "ramp v2" {
		t.Errorf("session %+v", se)
	}
	if s.Name != "" {
		t.Errorf("an unmapped column was stored: name %q", s.Name)
	}
	txt := reportText(pl.Report)
	for _, want := range []string{`"F" read as "female"`, `read and not stored (no lab_metadata.fields entry): "Name"`, `"Operator notes"`, `the row of subject "P01" (line 2)`} {
		if !strings.Contains(txt, want) {
			t.Errorf("report lacks %q:\n%s", want, txt)
		}
	}
	roles := map[string]bool{}
	for _, src := range pl.Rec.Provenance.Sources {
		roles[src.Role] = true
	}
	if !roles["subjects"] || !roles["lab_metadata"] {
		t.Errorf("provenance roles %v", roles)
	}
	// "?" is mapped to not known, an empty cell is not known.
	recs[1].Inputs.Subjects = filepath.Join(dir, "subjects.csv")
	pl, err = Read(recs[1].Inputs)
	if err != nil {
		t.Fatal(err)
	}
	pl.Close()
	if pl.Rec.Subject.Sex != "" || !math.IsNaN(pl.Rec.Subject.HeightCm) || pl.Rec.Subject.AgeYears != 29 {
		t.Errorf("P03: %+v", pl.Rec.Subject)
	}
}

func reportText(r *Report) string {
	var b strings.Builder
	r.WriteText(&b)
	return b.String()
}

// labRefusal imports a one-recording study and returns the ParseError.
func labRefusal(t *testing.T, profile, subjects, info string) *ParseError {
	t.Helper()
	dir, prof := writeLabStudy(t, profile, subjects, map[string]string{"R1": info})
	recs, err := FindRecordings(dir, prof)
	if err != nil {
		t.Fatal(err)
	}
	in := recs[0].Inputs
	in.Subjects = filepath.Join(dir, "subjects.csv")
	pl, err := Read(in)
	if err == nil {
		pl.Close()
		t.Fatalf("accepted; subject %+v", pl.Rec.Subject)
	}
	pe := AsParseError(err)
	if pe == nil {
		t.Fatalf("not a ParseError: %v", err)
	}
	return pe
}

func TestLabMetadataRefusals(t *testing.T) {
	info := "Participant: P01\nRecording date: 2026-03-14\n"
	for _, c := range []struct {
		name, subjects, info, profile string
		file                          string
		line, col                     int
		want                          []string
	}{
		{"unknown word", strings.Replace(labSubjects, "P01,F", "P01,W", 1), info, labProfile, "subjects.csv", 2, 2,
			[]string{`"W" is not a value of subject.sex`, "allowed values: female, male, other", `lab_metadata.values.subject.sex`, "P01,W,34"}},
		{"word in another case", strings.Replace(labSubjects, "P01,F,34,R", "P01,F,34,right-handed", 1), info, labProfile, "subjects.csv", 2, 4,
			[]string{`"right-handed" is not a value of subject.dominant_side`, "left, right, both"}},
		{"inches without the flag", strings.Replace(labSubjects, "Height (cm)", "Height (in)", 1), info, labProfile, "subjects.csv", 2, 5,
			[]string{"states in, the field holds cm", "lab_metadata.convert_units: true"}},
		{"a unit muarc cannot convert", strings.Replace(labSubjects, "Height (cm)", "Height (hands)", 1), info, labProfile + "  convert_units: true\n", "subjects.csv", 2, 5,
			[]string{`"hands"`, "cannot convert to cm"}},
		{"a day-first date", labSubjects, "Participant: P01\nRecording date: 14.03.2026\n", labProfile, "info.txt", 2, 0,
			[]string{`"14.03.2026" is not a date or RFC 3339 time`, "YYYY-MM-DD", "Recording date: 14.03.2026"}},
		{"not a number", strings.Replace(labSubjects, "P01,F,34", "P01,F,thirty", 1), info, labProfile, "subjects.csv", 2, 3,
			[]string{`"thirty" is not a number`, "subject.age_years"}},
		{"an infinity", strings.Replace(labSubjects, "P01,F,34", "P01,F,inf", 1), info, labProfile, "subjects.csv", 2, 3,
			[]string{`"inf" is not a number`}},
		{"no row for the subject", labSubjects, "Participant: P09\n", labProfile, "subjects.csv", 0, 0,
			[]string{`no row for subject "P09"`, `add a row for "P09"`}},
		{"a subject twice", labSubjects + "P01,F,35,R,168,Ann Example\n", info, labProfile, "subjects.csv", 5, 1,
			[]string{`subject "P01" has a second row (the first is on line 2)`}},
		{"no key column", strings.Replace(labSubjects, "ID,", "Code,", 1), info, labProfile, "subjects.csv", 1, 0,
			[]string{`no column "ID"`, `"Code"`}},
		{"two sources differ", labSubjects, info + "Sex: M\n", labProfile, "subjects.csv", 2, 2,
			[]string{"subject.sex is female here but male in", "info.txt:3"}},
		{"no subject code", labSubjects, "Recording date: 2026-03-14\n", labProfile, "R1", 0, 0,
			[]string{"cannot tell which row of", "subject_from: folder"}},
		{"a one-row table with two rows", labSubjects, "Participant,Recording date\nP01,2026-03-14\nP02,2026-03-15\n", labProfile, "info.txt", 3, 0,
			[]string{"2 rows under the header", "lab_metadata.subjects"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			pe := labRefusal(t, c.profile, c.subjects, c.info)
			if filepath.Base(pe.File) != c.file || pe.Line != c.line || pe.Column != c.col {
				t.Errorf("place %s:%d:%d, want %s:%d:%d (%v)", filepath.Base(pe.File), pe.Line, pe.Column, c.file, c.line, c.col, pe)
			}
			for _, w := range c.want {
				if !strings.Contains(pe.Error(), w) {
					t.Errorf("message lacks %q: %v", w, pe)
				}
			}
		})
	}
}

// The international inch is exactly 2.54 cm (international yard and pound
// agreement, 1959; UCUM [in_i]); converted only when the profile says so.
func TestLabMetadataConvertsInchesWhenAsked(t *testing.T) {
	dir, prof := writeLabStudy(t, labProfile+"  convert_units: true\n", strings.Replace(labSubjects, "Height (cm)", "Height (in)", 1),
		map[string]string{"R1": "Participant: P02\n"})
	recs, _ := FindRecordings(dir, prof)
	in := recs[0].Inputs
	in.Subjects = filepath.Join(dir, "subjects.csv")
	pl, err := Read(in)
	if err != nil {
		t.Fatal(err)
	}
	pl.Close()
	if got, want := pl.Rec.Subject.HeightCm, 181.5*2.54; got != want {
		t.Errorf("height %v cm, want %v", got, want)
	}
	if txt := reportText(pl.Report); !strings.Contains(txt, "181.5 in converted to cm (x 2.54") {
		t.Errorf("report does not say it converted:\n%s", txt)
	}
}

// A one-row table with a decimal comma (semicolons between cells) and a
// sidecar that agrees with it.
func TestLabMetadataOneRowTableAndSidecar(t *testing.T) {
	prof := strings.Replace(labProfile, "  subjects: subjects.csv\n", "", 1)
	dir, p := writeLabStudy(t, prof, "", map[string]string{"R1": "Participant;Height (cm);Sex\nP07;172,5;M\n"})
	side := `{"study": {}, "session": {}, "subject": {"id": "P07", "sex": "male"}, "trials": [{"name": "ramp"}]}`
	if err := os.WriteFile(filepath.Join(dir, "R1", "metadata.json"), []byte(side), 0o644); err != nil {
		t.Fatal(err)
	}
	recs, err := FindRecordings(dir, p)
	if err != nil || len(recs) != 1 {
		t.Fatalf("%v %v", recs, err)
	}
	pl, err := Read(recs[0].Inputs)
	if err != nil {
		t.Fatal(err)
	}
	pl.Close()
	if s := pl.Rec.Subject; s.HeightCm != 172.5 || s.Sex != "male" || s.ID != "P07" {
		t.Errorf("subject %+v", s)
	}
	// The sidecar saying otherwise is refused with both places.
	if err := os.WriteFile(filepath.Join(dir, "R1", "metadata.json"), []byte(strings.Replace(side, `"male"`, `"female"`, 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = Read(recs[0].Inputs)
	pe := AsParseError(err)
	if pe == nil || pe.Line != 2 || pe.Column != 3 || !strings.Contains(pe.Msg, "subject.sex is male here but female in the sidecar") || !strings.Contains(pe.Msg, "metadata.json:1:") {
		t.Errorf("got %v", err)
	}
}

func TestLabMetadataProfileChecks(t *testing.T) {
	for _, c := range []struct{ yaml, want string }{
		{"lab_metadata:\n  fields: {Sex: subject.gender}\n", `"subject.gender" is not a field a lab's metadata can fill`},
		{"lab_metadata:\n  fields: {Muscle: \"trials[].arrays[].muscle\"}\n", "is not a field a lab's metadata can fill"},
		{"lab_metadata:\n  values: {subject.sex: {F: woman}}\n", `"F" -> "woman": allowed values are female, male, other`},
		{"lab_metadata:\n  subjects: s.csv\n", "without subject_key"},
		{"lab_metadata:\n  subject_from: name\n", `subject_from "name"`},
		{"lab_metadata:\n  fields: {X: subject.extra.height_cm}\n", "is a field of the layout"},
	} {
		p := writeTemp(t, "p.yaml", c.yaml)
		_, err := LoadProfile(p)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: got %v, want %q", c.yaml, err, c.want)
		}
	}
}

func FuzzLabFile(f *testing.F) {
	for _, s := range []string{"Participant: P01\nRecording date: 2026-03-14\n", "a,b\n1,2\n", "a;b\n1,5;\"x\"\"y\"\n", "\xef\xbb\xbfk: v\r\n", "# c\n\nk: v\na,b\n1,2\n", "a\n1\n2\n", ""} {
		f.Add(s)
	}
	m := &ProfileLabMetadata{Fields: map[string]string{"a": "subject.age_years", "k": "subject.sex", "b": "session.site"}}
	f.Fuzz(func(t *testing.T, s string) {
		p := filepath.Join(t.TempDir(), "info.txt")
		if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
		cells, dc, err := readLabFile(p)
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("not a ParseError: %v", err)
			}
			return
		}
		vals, _, err := m.mapCells(p, cells, dc)
		if err != nil && AsParseError(err) == nil {
			t.Fatalf("not a ParseError: %v", err)
		}
		for _, v := range vals {
			if f, ok := v.v.(float64); ok && (math.IsNaN(f) || math.IsInf(f, 0)) {
				t.Fatalf("stored %v", f)
			}
		}
	})
}

// subject_from: folder takes the code from the recording folder's first
// path part.
func TestLabMetadataSubjectFromFolder(t *testing.T) {
	prof := strings.Replace(labProfile, "  subject_key: ID\n", "  subject_key: ID\n  subject_from: folder\n", 1)
	dir, p := writeLabStudy(t, prof, labSubjects, map[string]string{"P02/visit1": "Room: lab room 3\n"})
	res, err := ImportStudy(dir, t.TempDir(), StudyOptions{Profile: p, Workers: 1})
	if err != nil || len(res) != 1 || res[0].Error != "" {
		t.Fatalf("%+v %v", res, err)
	}
	if txt := reportText(res[0].Report); !strings.Contains(txt, `the row of subject "P02" (line 3), the subject of the recording folder`) {
		t.Errorf("report:\n%s", txt)
	}
}
