package validate

import (
	"strings"
	"testing"
)

func TestCheckMetadataPaths(t *testing.T) {
	fs, err := CheckMetadataJSON([]byte(`{"study": {}, "subject": {"sex": "f"}, "session": {},
	  "trials": [{"name": "t1", "arrays": [{"name": "a", "sampling_rate_hz": 0}]}, {"task": "x"}], "bogus": 1}`))
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]string{
		"/bogus":                              "metadata.additional_property_not_allowed",
		"/subject/sex":                        "metadata.enum",
		"/trials/0/arrays/0/sampling_rate_hz": "metadata.number_gt",
		"/trials/1/name":                      "metadata.required",
	}
	if len(fs) != len(want) {
		t.Fatalf("got %d findings: %v", len(fs), fs)
	}
	for _, f := range fs {
		if want[f.JSONPath] != f.Check || f.Severity != Error || f.Hint == "" {
			t.Errorf("unexpected %s at %q (%s)", f.Check, f.JSONPath, f.Message)
		}
	}
	if fs := CheckMetadata(map[string]any{"study": map[string]any{}, "subject": map[string]any{}, "session": map[string]any{}, "trials": []any{}}); len(fs) != 0 {
		t.Fatalf("minimal sidecar: %v", fs)
	}
	if _, err := CheckMetadataJSON([]byte("{\n  \"study\": ,\n}")); err == nil {
		t.Fatal("bad JSON accepted")
	}
}

// A bad date names the form expected, not a regular expression; "F" for
// sex suggests the word.
func TestMetadataMessagesForPeople(t *testing.T) {
	m := map[string]any{"study": map[string]any{}, "subject": map[string]any{"sex": "F", "birth_date": "14.03.1990"}, "session": map[string]any{"date": "2026/03/14"}, "trials": []any{}}
	got := map[string]Finding{}
	for _, f := range CheckMetadata(m) {
		got[f.JSONPath] = f
	}
	if f := got["/subject/sex"]; !strings.Contains(f.Hint, `did you mean "female"?`) {
		t.Errorf("sex: %+v", f)
	}
	for _, p := range []string{"/subject/birth_date", "/session/date"} {
		if f := got[p]; !strings.Contains(f.Message, "not a date in the form YYYY-MM-DD") || strings.Contains(f.Message, "[0-9]") {
			t.Errorf("%s: %+v", p, f)
		}
	}
}
