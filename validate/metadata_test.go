package validate

import "testing"

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
