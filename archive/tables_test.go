package archive

import (
	"encoding/json"
	"math"
	"os/exec"
	"reflect"
	"slices"
	"strings"
	"testing"

	"muarc/internal/fieldbind"
	"muarc/internal/reftest"
	"muarc/record"
	"muarc/schema"
)

// SubjectRow, the subjects table and the catalogue's summary carry every
// subject field of the registry that does not identify a person, under
// the registry's name, and none that does.
func TestSubjectRowFollowsRegistry(t *testing.T) {
	bound := map[string]bool{}
	for _, b := range fieldbind.Bind(&SubjectRow{}, "subject") {
		bound[b.Name()] = true
	}
	for _, f := range schema.FieldsOf("subject") {
		if f.Identifying && bound[f.Name] {
			t.Errorf("SubjectRow carries %s, which identifies a person", f.Path())
		}
		if !f.Identifying && !f.ViewOnly && !bound[f.Name] {
			t.Errorf("SubjectRow has no field for %s (tag it `layout:%q`)", f.Path(), f.Name)
		}
	}
	jsonNames := func(v any) []string {
		var out []string
		rt := reflect.TypeOf(v)
		for i := 0; i < rt.NumField(); i++ {
			n, _, _ := strings.Cut(rt.Field(i).Tag.Get("json"), ",")
			out = append(out, n)
		}
		return out
	}
	rowJSON, catJSON := jsonNames(SubjectRow{}), jsonNames(summaryRecord{})
	rt := reflect.TypeOf(SubjectRow{})
	for i := 0; i < rt.NumField(); i++ {
		name := rt.Field(i).Tag.Get("layout")
		want := name
		if name == "id" {
			want = subjectIDColumn
		}
		if j := rowJSON[i]; j != want && j != "-" {
			t.Errorf("SubjectRow.%s: JSON name %q, registry %q", rt.Field(i).Name, j, want)
		}
		if !slices.Contains(catJSON, want) {
			t.Errorf("the catalogue's summary has no %q (archive/CATALOGUE.md)", want)
		}
	}
}

// The subjects table read back by Python's csv module (a second reader):
// one row per subject with the registry's column names, values as
// recorded, a field that differs between a subject's recordings marked
// "varies" with a note.
func TestSubjectsTableColumns(t *testing.T) {
	sub := func(id, sex string, age, mass float64) record.Subject {
		return record.Subject{ID: id, Name: "never shown", Sex: sex, AgeYears: age, AgeBand: "", HeightCm: math.NaN(), MassKg: mass, DominantSide: "left"}
	}
	s1, s2 := sub("P01", "female", 34, 61.5), sub("P02", "male", math.NaN(), 80)
	s1b := s1
	s1b.MassKg = 62
	sums := []RecordingSummary{
		{File: "a.h5", Subject: subjectRowOf(&s1), Session: "1"},
		{File: "b.h5", Subject: subjectRowOf(&s2), Session: "1"},
		{File: "c.h5", Subject: subjectRowOf(&s1b), Session: "2"},
	}
	tb := StudyTables(sums, nil)
	if len(tb.Notes) != 1 || !strings.Contains(tb.Notes[0], `mass_kg is "61.5" in one recording and "62" in c.h5`) {
		t.Errorf("notes %q", tb.Notes)
	}
	if strings.Contains(string(tb.Subjects), "never shown") {
		t.Fatal("an identifying field reached the subjects table")
	}
	py := reftest.NeedPython(t, "csv", "json")
	cmd := exec.Command(py, "-c", `import csv, json, sys
print(json.dumps(list(csv.DictReader(sys.stdin, delimiter="\t"))))`)
	cmd.Stdin = strings.NewReader(string(tb.Subjects))
	out, err := cmd.Output()
	if err != nil {
		t.Fatal(err)
	}
	var rows []map[string]string
	if err := json.Unmarshal(out, &rows); err != nil {
		t.Fatal(err)
	}
	want := []map[string]string{
		{"subject": "P01", "sex": "female", "age_years": "34", "age_band": "", "height_cm": "", "mass_kg": "varies", "height_band_cm": "", "mass_band_kg": "", "dominant_side": "left", "sessions": "2", "recordings": "2"},
		{"subject": "P02", "sex": "male", "age_years": "", "age_band": "", "height_cm": "", "mass_kg": "80", "height_band_cm": "", "mass_band_kg": "", "dominant_side": "left", "sessions": "1", "recordings": "1"},
	}
	if !reflect.DeepEqual(rows, want) {
		t.Errorf("Python's csv reads\n%v\nwant\n%v", rows, want)
	}
}
