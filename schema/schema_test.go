package schema

import (
	"bytes"
	"encoding/json"
	"muarc/internal/reftest"
	"os/exec"
	"strings"
	"testing"

	"github.com/xeipuuv/gojsonschema"
)

// python3 is the system interpreter with Debian's python3-jsonschema; the
// pyenv python3 first on PATH does not carry the system packages.
const python3 = "/usr/bin/python3"

// needJSONSchemaPy skips (or, under CI, fails) when /usr/bin/python3 lacks
// the jsonschema module (Debian python3-jsonschema).
func needJSONSchemaPy(t *testing.T) { reftest.NeedPython(t, "jsonschema") }

// TestSchemaIsDraft07 checks the schema against the draft-07 meta-schema as
// shipped in Debian's python3-jsonschema (Draft7Validator.check_schema).
func TestSchemaIsDraft07(t *testing.T) {
	needJSONSchemaPy(t)
	cmd := exec.Command(python3, "-c", `
import json, sys, jsonschema
s = json.load(sys.stdin)
jsonschema.Draft7Validator.check_schema(s)
assert s["$schema"] == "http://json-schema.org/draft-07/schema#", s["$schema"]
print("ok")
`)
	cmd.Stdin = strings.NewReader(RecordingSchema)
	out, err := cmd.CombinedOutput()
	if err != nil || strings.TrimSpace(string(out)) != "ok" {
		t.Fatalf("draft-07 meta-schema check failed: %v\n%s", err, out)
	}
}

// TestSchemaCompilesInGo checks that gojsonschema loads the schema.
func TestSchemaCompilesInGo(t *testing.T) {
	if _, err := gojsonschema.NewSchema(gojsonschema.NewStringLoader(RecordingSchema)); err != nil {
		t.Fatal(err)
	}
}

// full is a complete metadata view as a muarc file gives it.
const full = `{
 "layout": "muarc-recording", "layout_version": "1.0", "created": "2026-03-14T10:00:00Z", "software": "muarc 0.1.0",
 "study": {"id": "st-demo", "title": "Ramp contractions", "license": "CC-BY-4.0", "cohort": "B", "visits": 3, "pilot": false, "weights": [1, 2.5]},
 "subject": {"id": "P01", "name": "Ada Example", "birth_date": "1990-05-04", "age_years": 35.5, "sex": "female",
   "height_cm": 170, "mass_kg": 65.2, "dominant_side": "right", "phone": "+00 000", "email": "a@example.invalid", "notes": "none"},
 "session": {"id": "S1", "date": "2026-03-14T09:30:00+01:00", "site": "lab A", "operator": "op 3"},
 "trials": [{
   "name": "ramp_10", "task": "isometric ankle dorsiflexion", "target_pct_mvc": 10, "mvc": 412.5, "mvc_unit": "N",
   "profile_shape": "trapezoid", "rest_s": 3, "ramp_up_s": 5, "plateau_s": 20, "ramp_down_s": 5,
   "force": {"sampling_rate_hz": 2048, "start_s": 0, "unit": "N", "samples": 67584},
   "force_target": {"sampling_rate_hz": 2048, "unit": "%", "samples": 67584},
   "arrays": [{
     "name": "ta_grid", "muscle": "tibialis anterior", "side": "left", "rows": 8, "columns": 8, "ied_mm": 8,
     "gain": 150, "adc_bits": 16, "filter_low_hz": 10, "filter_high_hz": 500, "montage": "monopolar",
     "reference": "ankle strap", "sampling_rate_hz": 2048, "start_s": 0, "unit": "uV",
     "sample_type": "float32", "samples": 67584, "channel_count": 2,
     "channels": [{"label": "c1", "row": 0, "column": 0, "x_mm": 0, "y_mm": 0, "usable": true},
                  {"label": "aux", "row": -1, "column": -1, "usable": false}],
     "decompositions": [{
       "name": "auto", "method": "blind source separation", "method_version": "2.1",
       "parameters": {"iterations": 50}, "edited_by_hand": false, "notes": "",
       "units": [{"id": 0, "discharge_count": 210, "silhouette": 0.93, "pnr_db": 34.1, "accuracy_pct": 91,
                  "isi_cov": 0.14, "recruit_pct_mvc": 3.2, "derecruit_pct_mvc": 2.8, "initial_rate_pps": 7.5,
                  "mean_rate_pps": 11.2, "spike_area": 1.5, "flag": "kept"},
                 {"id": 7}],
       "muaps": {"units": 2, "channels": 2, "lags": 41, "first_lag": -20, "unit": "uV"}}]}]}],
 "provenance": {
   "sources": [{"name": "emg/ramp_10.csv", "role": "emg", "sha256": "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855", "bytes": 0}],
   "history": [{"action": "import", "software": "muarc 0.1.0", "time": "2026-03-14T10:00:00Z", "details": {"force": "f.csv"}}]}
}`

// schemaCases are documents with the verdict the schema must give. Each
// invalid case breaks exactly one rule of the full view (or of the minimal
// sidecar).
var schemaCases = []struct {
	name  string
	doc   string // JSON, or a patch "pointer=value" applied to full
	valid bool
}{
	{"full view", full, true},
	{"minimal sidecar", `{"study": {}, "subject": {"id": "P01"}, "session": {}, "trials": []}`, true},
	{"sidecar with trial names only", `{"study": {"id": "s"}, "subject": {}, "session": {"date": "2026-03-14"}, "trials": [{"name": "t1", "task": "ramp"}]}`, true},
	{"target above 100 is a validator warning, not a schema error", "/trials/0/target_pct_mvc=120", true},
	{"birth year only", `/subject/birth_date="1990"`, true},
	{"session calendar date", `/session/date="2026-03-14"`, true},
	{"double differential montage", `/trials/0/arrays/0/montage="double differential"`, true},
	{"sha256 withheld (empty cell)", `/provenance/sources/0/sha256=""`, true},
	{"source name withheld (empty cell)", `/provenance/sources/0/name=""`, true},
	{"negative pnr is a number", "/trials/0/arrays/0/decompositions/0/units/0/pnr_db=-3", true},

	{"study missing", `{"subject": {}, "session": {}, "trials": []}`, false},
	{"subject missing", `{"study": {}, "session": {}, "trials": []}`, false},
	{"session missing", `{"study": {}, "subject": {}, "trials": []}`, false},
	{"trials missing", `{"study": {}, "subject": {}, "session": {}}`, false},
	{"trials not a list", `/trials={}`, false},
	{"unknown top-level field", `/extra_top=1`, false},
	{"wrong layout name", `/layout="other-layout"`, false},
	{"layout version not major.minor", `/layout_version="1"`, false},
	{"created not RFC 3339", `/created="14.03.2026 10:00"`, false},
	{"sex outside the enum", `/subject/sex="f"`, false},
	{"dominant side outside the enum", `/subject/dominant_side="ambidextrous"`, false},
	{"birth date in another form", `/subject/birth_date="04/05/1990"`, false},
	{"negative age", "/subject/age_years=-1", false},
	{"height zero", "/subject/height_cm=0", false},
	{"age as text", `/subject/age_years="35"`, false},
	{"extra value an object", `/study/cohort={"a": 1}`, false},
	{"extra list of text", `/study/weights=["a"]`, false},
	{"session date not a date", `/session/date="March 14"`, false},
	{"trial without name", `/trials/0/name=`, false},
	{"trial name with a slash", `/trials/0/name="a/b"`, false},
	{"negative target", "/trials/0/target_pct_mvc=-5", false},
	{"MVC zero", "/trials/0/mvc=0", false},
	{"empty MVC unit", `/trials/0/mvc_unit=""`, false},
	{"negative plateau", "/trials/0/plateau_s=-1", false},
	{"force without rate", "/trials/0/force/sampling_rate_hz=", false},
	{"force rate zero", "/trials/0/force/sampling_rate_hz=0", false},
	{"force unknown field", "/trials/0/force/gain=2", false},
	{"force samples fractional", "/trials/0/force/samples=2.5", false},
	{"array without name", "/trials/0/arrays/0/name=", false},
	{"array without rate", "/trials/0/arrays/0/sampling_rate_hz=", false},
	{"array rate negative", "/trials/0/arrays/0/sampling_rate_hz=-2048", false},
	{"side outside the enum", `/trials/0/arrays/0/side="both"`, false},
	{"montage outside the enum", `/trials/0/arrays/0/montage="tripolar"`, false},
	{"rows negative", "/trials/0/arrays/0/rows=-1", false},
	{"rows zero: not a grid", "/trials/0/arrays/0/rows=0", true},
	{"ied zero", "/trials/0/arrays/0/ied_mm=0", false},
	{"adc bits zero", "/trials/0/arrays/0/adc_bits=0", false},
	{"sample type float16", `/trials/0/arrays/0/sample_type="float16"`, false},
	{"channel count zero", "/trials/0/arrays/0/channel_count=0", false},
	{"channel row below -1", "/trials/0/arrays/0/channels/0/row=-2", false},
	{"channel usable as number", "/trials/0/arrays/0/channels/0/usable=1", false},
	{"channel unknown field", "/trials/0/arrays/0/channels/0/z_mm=1", false},
	{"decomposition without name", "/trials/0/arrays/0/decompositions/0/name=", false},
	{"parameters as text", `/trials/0/arrays/0/decompositions/0/parameters="{}"`, false},
	{"edited_by_hand as number", "/trials/0/arrays/0/decompositions/0/edited_by_hand=0", false},
	{"unit without id", "/trials/0/arrays/0/decompositions/0/units/1/id=", false},
	{"unit id fractional", "/trials/0/arrays/0/decompositions/0/units/1/id=1.5", false},
	{"silhouette above 1", "/trials/0/arrays/0/decompositions/0/units/0/silhouette=1.2", false},
	{"accuracy above 100", "/trials/0/arrays/0/decompositions/0/units/0/accuracy_pct=101", false},
	{"negative mean rate", "/trials/0/arrays/0/decompositions/0/units/0/mean_rate_pps=-1", false},
	{"negative discharge count", "/trials/0/arrays/0/decompositions/0/units/0/discharge_count=-1", false},
	{"extra unit column boolean", "/trials/0/arrays/0/decompositions/0/units/0/flag=true", false},
	{"muaps without lags", "/trials/0/arrays/0/decompositions/0/muaps/lags=", false},
	{"sha256 upper case", `/provenance/sources/0/sha256="E3B0C44298FC1C149AFBF4C8996FB92427AE41E4649B934CA495991B7852B855"`, false},
	{"source name absolute", `/provenance/sources/0/name="/home/x/emg.csv"`, false},
	{"source name with a drive letter", `/provenance/sources/0/name="C:\\data\\emg.csv"`, false},
	{"sha256 too short", `/provenance/sources/0/sha256="e3b0c442"`, false},
	{"source bytes negative", "/provenance/sources/0/bytes=-1", false},
	{"history time not RFC 3339", `/provenance/history/0/time="yesterday"`, false},
	{"history without action", "/provenance/history/0/action=", false},
	{"details as text", `/provenance/history/0/details="x"`, false},
}

// docOf builds a case's document: JSON as given, or full patched at a JSON
// Pointer ("pointer=value" sets, "pointer=" deletes).
func docOf(t *testing.T, s string) any {
	t.Helper()
	if strings.HasPrefix(strings.TrimSpace(s), "{") {
		var v any
		if err := json.Unmarshal([]byte(s), &v); err != nil {
			t.Fatalf("case JSON: %v", err)
		}
		return v
	}
	ptr, val, _ := strings.Cut(s, "=")
	var doc any
	if err := json.Unmarshal([]byte(full), &doc); err != nil {
		t.Fatal(err)
	}
	parts := strings.Split(strings.TrimPrefix(ptr, "/"), "/")
	cur := doc
	for _, p := range parts[:len(parts)-1] {
		switch c := cur.(type) {
		case map[string]any:
			cur = c[p]
		case []any:
			var i int
			if err := json.Unmarshal([]byte(p), &i); err != nil {
				t.Fatalf("pointer %s: %v", ptr, err)
			}
			cur = c[i]
		}
	}
	m, ok := cur.(map[string]any)
	if !ok {
		t.Fatalf("pointer %s: parent is not an object", ptr)
	}
	last := parts[len(parts)-1]
	if _, ok := m[last]; val == "" && !ok {
		t.Fatalf("pointer %s: nothing to delete", ptr)
	}
	if val == "" {
		delete(m, last)
		return doc
	}
	var v any
	if err := json.Unmarshal([]byte(val), &v); err != nil {
		t.Fatalf("value %s: %v", val, err)
	}
	m[last] = v
	return doc
}

// TestSchemaAgreement validates every case with gojsonschema and with
// Debian's python3-jsonschema (Draft7Validator, a second, independent
// implementation of draft-07); both must give the verdict the case expects.
func TestSchemaAgreement(t *testing.T) {
	s, err := gojsonschema.NewSchema(gojsonschema.NewStringLoader(RecordingSchema))
	if err != nil {
		t.Fatal(err)
	}
	docs := make([]any, len(schemaCases))
	goVerdict := make([]bool, len(schemaCases))
	for i, c := range schemaCases {
		docs[i] = docOf(t, c.doc)
		res, err := s.Validate(gojsonschema.NewGoLoader(docs[i]))
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		goVerdict[i] = res.Valid()
		if res.Valid() != c.valid {
			t.Errorf("gojsonschema: %s: valid=%v, want %v; errors: %v", c.name, res.Valid(), c.valid, res.Errors())
		}
	}

	needJSONSchemaPy(t)
	in, _ := json.Marshal(map[string]any{"schema": json.RawMessage(RecordingSchema), "docs": docs})
	cmd := exec.Command(python3, "-c", `
import json, sys, jsonschema
d = json.load(sys.stdin)
v = jsonschema.Draft7Validator(d["schema"])
print(json.dumps([v.is_valid(x) for x in d["docs"]]))
`)
	cmd.Stdin = bytes.NewReader(in)
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("python3-jsonschema: %v", err)
	}
	var pyVerdict []bool
	if err := json.Unmarshal(out, &pyVerdict); err != nil || len(pyVerdict) != len(schemaCases) {
		t.Fatalf("python3-jsonschema output %q: %v", out, err)
	}
	for i, c := range schemaCases {
		if pyVerdict[i] != c.valid {
			t.Errorf("python3-jsonschema: %s: valid=%v, want %v", c.name, pyVerdict[i], c.valid)
		}
		if pyVerdict[i] != goVerdict[i] {
			t.Errorf("%s: gojsonschema says %v, python3-jsonschema says %v", c.name, goVerdict[i], pyVerdict[i])
		}
	}
}
