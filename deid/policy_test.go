package deid

import (
	"strings"
	"testing"
)

// TestDefaultPolicySafeHarbor checks the built-in policy against the Safe
// Harbor identifier kinds of 45 CFR 164.514(b)(2)(i) that a muarc recording
// can hold: (A) names, (C) dates and ages over 89, (D)-(F) phone and e-mail,
// (R) any other unique identifying number or code (the subject code),
// besides free text that may carry any of them.
func TestDefaultPolicySafeHarbor(t *testing.T) {
	p := Default()
	want := map[string]Action{
		"subject.name":              Drop,         // (A) names
		"subject.birth_date":        Year,         // (C) all elements of dates except year
		"session.date":              Shift,        // (C) dates of service, moved per subject
		"subject.age_years":         Generalize,   // (C) ages over 89 -> "90 or older"
		"subject.age_band":          Generalize,   // (C)
		"subject.phone":             Drop,         // (D) telephone numbers
		"subject.email":             Drop,         // (F) e-mail addresses
		"subject.id":                Pseudonymize, // (R) unique identifying codes
		"session.id":                Pseudonymize, // (R)
		"subject.notes":             Drop,         // free text
		"session.site":              Drop,         // (B) geographic subdivisions, in free text
		"session.operator":          Drop,
		"trials[].notes":            Drop,
		"provenance.sources[].name": Pseudonymize,
		"trials[].arrays[].extra.*": Drop, // device serial numbers (M)
	}
	for path, act := range want {
		if got, named := p.ActionFor(path); got != act || !named {
			t.Errorf("%s: %s (named %v), want %s", path, got, named, act)
		}
	}
	if got, named := p.ActionFor("trials[].arrays[].extra.amplifier_serial"); got != Drop || !named {
		t.Errorf("extra pattern: %s %v", got, named)
	}
	if got, named := p.ActionFor("subject.height_band_cm"); got != Keep || !named {
		t.Errorf("band extra: %s %v", got, named)
	}
	if p.Name != DefaultPolicyName || p.K != DefaultK || p.AgeBandYears != 10 {
		t.Errorf("settings %+v", p)
	}
}

func TestParsePolicyYAMLAndBase(t *testing.T) {
	y := `# a study's own policy
name: lab-share-2
base: muarc-safe-harbor-1
age_band_years: 5
fields:
  session.date: year
  trials[].notes: scrub
  subject.extra.handedness_score: keep
`
	p, err := ParsePolicy([]byte(y), "lab.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if a, _ := p.ActionFor("session.date"); a != Year {
		t.Errorf("override lost: %s", a)
	}
	if a, _ := p.ActionFor("subject.name"); a != Drop {
		t.Errorf("base lost: %s", a)
	}
	if p.AgeBandYears != 5 || p.K != 5 {
		t.Errorf("settings %d %d", p.AgeBandYears, p.K)
	}
	if p.SHA256() == Default().SHA256() {
		t.Error("different policies, same hash")
	}
	// Same policy in JSON, keys in another order: same hash.
	j := `{"fields": {"subject.extra.handedness_score": "keep", "trials[].notes": "scrub", "session.date": "year"},
	  "age_band_years": 5, "base": "muarc-safe-harbor-1", "name": "lab-share-2"}`
	q, err := ParsePolicy([]byte(j), "lab.json")
	if err != nil {
		t.Fatal(err)
	}
	if q.SHA256() != p.SHA256() {
		t.Error("hash depends on spelling")
	}
}

func TestParsePolicyErrors(t *testing.T) {
	cases := []struct{ text, want string }{
		{`{"name": "x", "fields": {"subject.nmae": "drop"}}`, `"subject.nmae" is not a metadata field`},
		{`{"name": "x", "fields": {"subject.nme": "drop"}}`, `did you mean subject.name?`},
		{`{"name": "x", "fields": {"subject.name": "hide"}}`, `action "hide" not possible`},
		{`{"name": "x", "fields": {"subject.name": "generalize"}}`, `choose keep, drop or scrub`},
		{`{"name": "x", "fields": {"trials[].name": "drop"}}`, `choose keep or pseudonymize`},
		{`{"name": "x", "fields": {}}`, `no fields`},
		{`{"fields": {"subject.name": "drop"}}`, `no name`},
		{`{"name": "x", "colour": 1, "fields": {"subject.name": "drop"}}`, `p.json:1:15: unknown member "colour"`},
		{"{\"name\": \"x\",\n \"fields\": {\"subject.name\" \"drop\"}}", `:2:`},
		{`{"name": "x", "base": "other", "fields": {"subject.name": "drop"}}`, `base "other" unknown`},
		{`{"name": "x", "k": 0.5, "fields": {"subject.name": "drop"}}`, `p.json:1:23: k: a number 0.5 where int is expected`},
		{"name: x\nfields:\n  subject.name: [drop]\n", `p.yaml:3:`},
		{"name: x\nwho: me\nfields:\n  subject.name: drop\n", `p.yaml:2: unknown member "who"`},
		{`{"name": "x", "age_band_years": 200, "fields": {"subject.name": "drop"}}`, `age_band_years 200`},
		{``, `no name`},
		{`{"name": "x", "fields": {"subject.extra.a[]": "drop"}}`, `not a metadata field`},
	}
	for _, c := range cases {
		name := "p.yaml"
		if strings.HasPrefix(c.text, "{") {
			name = "p.json"
		}
		_, err := ParsePolicy([]byte(c.text), name)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: error %v, want it to contain %q", c.text, err, c.want)
		}
	}
}

// FuzzParsePolicy: the parser never panics, and an accepted policy names
// only catalogue fields with allowed actions and has a stable hash.
func FuzzParsePolicy(f *testing.F) {
	f.Add(DefaultPolicyJSON())
	f.Add([]byte("name: a\nbase: muarc-safe-harbor-1\nfields:\n  session.date: year\n"))
	f.Add([]byte(`{"name":"b","fields":{"subject.extra.*":"scrub","trials[].arrays[].decompositions[].units[].extra.x":"keep"}}`))
	f.Add([]byte("{\"name\": 1}"))
	f.Add([]byte("- a\n- b\n"))
	f.Add([]byte("name: [\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := ParsePolicy(data, "fuzz.yaml")
		if err != nil {
			return
		}
		for path, act := range p.Fields {
			if checkField(path, act) != nil {
				t.Fatalf("accepted bad field %q %q", path, act)
			}
		}
		if p.SHA256() != p.computeSum() || len(p.SHA256()) != 64 {
			t.Fatal("hash")
		}
		b, _ := p.CanonicalJSON()
		q, err := ParsePolicy(b, "again.json")
		if err != nil || q.SHA256() != p.SHA256() {
			t.Fatalf("canonical form does not round-trip: %v", err)
		}
	})
}
