package validate

import (
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

func writeFile(t *testing.T, name, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestLoadRulesYAMLExample(t *testing.T) {
	r, err := LoadRules("testdata/rules.example.yaml")
	if err != nil {
		t.Fatal(err)
	}
	want := DefaultRules()
	want.SilhouetteMin, want.PNRMinDB, want.DoubletISIMs, want.MaxRatePPS = 0.85, 28, 15, 60
	want.MinDischarges, want.EMGMinRateHz = 20, 2000
	want.ForceUnits = []string{"N", "N.m"}
	want.Disabled = []string{"structure.unexpected", "discharge.doublet"}
	want.Severity = map[string]string{"quality.*": "note", "discharge.few": "error"}
	if !reflect.DeepEqual(r, want) {
		t.Fatalf("got %+v\nwant %+v", r, want)
	}
	if r.severity("quality.pnr") != Note || r.severity("discharge.few") != Error || r.severity("discharge.sorted") != Error ||
		r.severity("discharge.rate_high") != Warning {
		t.Fatal("severity overrides not applied")
	}
	if !r.disabled("discharge.doublet") || r.disabled("discharge.sorted") {
		t.Fatal("disabled list not applied")
	}
}

func TestLoadRulesJSONKeepsDefaults(t *testing.T) {
	p := writeFile(t, "r.json", `{"pnr_min_db": 25, "disabled": ["metadata.*"]}`)
	r, err := LoadRules(p)
	if err != nil {
		t.Fatal(err)
	}
	d := DefaultRules()
	if r.PNRMinDB != 25 || r.SilhouetteMin != d.SilhouetteMin || r.MinDischarges != d.MinDischarges || !reflect.DeepEqual(r.ForceUnits, d.ForceUnits) {
		t.Fatalf("got %+v", r)
	}
	if !r.disabled("metadata.enum") || !r.disabled("metadata.required") || r.disabled("layout.version") {
		t.Fatal("prefix pattern")
	}
}

func TestLoadRulesRefusesBadFiles(t *testing.T) {
	for _, c := range []struct{ name, text, want string }{
		{"r.yaml", "silhouete_min: 0.8\n", "silhouete_min"},
		{"r.json", `{"silhouete_min": 0.8}`, "silhouete_min"},
		{"r.json", "{\n  \"pnr_min_db\": \"high\"\n}", "r.json:2:"},
		{"r.json", "{\n  \"pnr_min_db\": 3,,\n}", "r.json:2:19"},
		{"r.yaml", "silhouette_min: 1.5\n", "above 1"},
		{"r.yaml", "doublet_isi_ms: -1\n", "negative"},
		{"r.yaml", "sustained_isis: 0\n", "sustained_isis"},
		{"r.yaml", "disabled: [discharge.sortd]\n", "discharge.sortd"},
		{"r.yaml", "severity: {discharge.sorted: fatal}\n", "fatal"},
		{"r.yaml", "severity: {nothing.*: note}\n", "nothing.*"},
		{"r.yaml", "max_rate_pps: [1, 2]\n", "r.yaml:1:"},
	} {
		_, err := LoadRules(writeFile(t, c.name, c.text))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s %q: error %v, want one naming %q", c.name, c.text, err, c.want)
		}
	}
	if _, err := LoadRules(filepath.Join(t.TempDir(), "missing.yaml")); err == nil {
		t.Error("missing file accepted")
	}
}

func TestEmptyRulesFileIsDefaults(t *testing.T) {
	r, err := LoadRules(writeFile(t, "r.yaml", "# nothing\n"))
	if err != nil || !reflect.DeepEqual(r, DefaultRules()) {
		t.Fatalf("%+v %v", r, err)
	}
}

// TestRulesChangeFindings: a rules file switches a check off, changes a
// threshold and re-ranks a check; Strict then makes warnings errors.
func TestRulesChangeFindings(t *testing.T) {
	rec := goodRecording()
	unitOf(rec, 0).Silhouette = 0.87
	unitOf(rec, 1).PNRdB = 29
	base := finish(CheckRecording(rec, DefaultRules()), DefaultOptions())
	if len(base) != 2 || base[0].Severity != Warning || base[1].Severity != Warning {
		t.Fatalf("defaults: %v", base)
	}
	r, err := LoadRules(writeFile(t, "r.yaml", "silhouette_min: 0.85\nseverity: {quality.pnr: note}\n"))
	if err != nil {
		t.Fatal(err)
	}
	fs := finish(CheckRecording(rec, r), Options{Rules: r})
	if len(fs) != 1 || fs[0].Check != "quality.pnr" || fs[0].Severity != Note {
		t.Fatalf("rules: %v", fs)
	}
	r.Disabled = []string{"quality.*"}
	if fs := finish(CheckRecording(rec, r), Options{Rules: r}); len(fs) != 0 {
		t.Fatalf("disabled: %v", fs)
	}
	strict := DefaultOptions()
	strict.Strict = true
	fs = finish(CheckRecording(rec, DefaultRules()), strict)
	if len(fs) != 2 || fs[0].Severity != Error || fs[1].Severity != Error {
		t.Fatalf("strict: %v", fs)
	}
}

// FuzzLoadRules: any bytes give rules that pass Check or an error, never a
// panic.
func FuzzLoadRules(f *testing.F) {
	b, _ := os.ReadFile("testdata/rules.example.yaml")
	f.Add(b, false)
	f.Add([]byte(`{"pnr_min_db": 25, "severity": {"quality.*": "note"}}`), true)
	f.Add([]byte("severity: [1]\n"), false)
	f.Add([]byte("{"), true)
	f.Fuzz(func(t *testing.T, b []byte, isJSON bool) {
		name := "fuzz.yaml"
		if isJSON {
			name = "fuzz.json"
		}
		r, err := parseRules(b, name)
		if err == nil {
			if cerr := r.Check(); cerr != nil {
				t.Fatalf("parsed rules fail Check: %v", cerr)
			}
		}
	})
}
