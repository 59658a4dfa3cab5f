package deid

import (
	"flag"
	"os"
	"strings"
	"testing"

	"muarc/schema"
)

var update = flag.Bool("update", false, "rewrite the generated table of POLICY.md")

// TestPolicyDoc checks that POLICY.md's field table is the one the field
// registry and the built-in policy give (rewrite it with -update), that the
// built-in policy's action for every registry field is the registry's
// default, and that LAYOUT.md describes the fields de-identification
// writes (the bands, the session year) and says what happens to the birth
// date as POLICY.md does.
func TestPolicyDoc(t *testing.T) {
	doc, err := os.ReadFile("POLICY.md")
	if err != nil {
		t.Fatal(err)
	}
	want, err := PolicyDocWithTable(string(doc))
	if err != nil {
		t.Fatal(err)
	}
	if *update {
		if err := os.WriteFile("POLICY.md", []byte(want), 0o644); err != nil {
			t.Fatal(err)
		}
	} else if want != string(doc) {
		t.Error("POLICY.md's field table differs from the registry and the built-in policy; run: go test ./deid -run TestPolicyDoc -update")
	}
	def := Default()
	for _, f := range schema.Fields {
		act, named := def.ActionFor(f.Path())
		switch {
		case !isPolicyClass(f.Class):
			if named {
				t.Errorf("%s is not a policy field but the built-in policy names it", f.Path())
			}
		case !named || string(act) != f.Default:
			t.Errorf("%s: built-in policy %q (named %v), registry default %q", f.Path(), act, named, f.Default)
		}
	}
	for p, a := range def.Fields {
		if err := checkField(p, a); err != nil {
			t.Error(err)
		}
	}
	// What de-identification writes in place of a value (bands, the
	// session year) are registry fields like any other, so LAYOUT.md's
	// tables, the JSON Schema and POLICY.md's table list them.
	for _, path := range []string{"subject.height_band_cm", "subject.mass_band_kg", "session.date_year"} {
		f, ok := schema.FieldByPath(path)
		if !ok || f.Default != schema.ActKeep || !strings.Contains(string(doc), "| `"+path+"` |") {
			t.Errorf("%s is written by de-identification: it must be a registry field kept by the built-in policy and in POLICY.md's table", path)
		}
	}
	bd, _ := schema.FieldByPath("subject.birth_date")
	if def.Fields["subject.birth_date"] != Year || !strings.Contains(bd.Meaning, "year") || !strings.Contains(string(doc), "`subject.birth_date` | yes | keep, drop, shift or year | year |") {
		t.Error("LAYOUT.md (registry) and POLICY.md must both say the built-in policy keeps the birth year")
	}
}
