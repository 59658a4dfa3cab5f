package convert

import (
	"bytes"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"muarc/deid"
	"muarc/recfile"
	"muarc/synth"
	"muarc/validate"
)

// The fields of layout 1.2 that BIDS-EMG requires (mains frequency,
// software filters, placement) are read from a sidecar, written, read back,
// seen by the JSON Schema in the metadata view and kept by the built-in
// de-identification policy.
func TestStandardsFieldsFromSidecarToDeidentified(t *testing.T) {
	sc, err := ReadSidecar(writeTemp(t, "metadata.json", string(ExampleSidecar)))
	if err != nil {
		t.Fatal(err)
	}
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	rec := gens[0].Recording
	sc.Apply(rec)
	last := len(rec.Trials) - 1
	a := &rec.Trials[last].Arrays[0]
	if rec.Trials[last].Name != "ramp_30pct" || a.Name != "ta_grid" {
		t.Fatalf("the example's trial is not new: %s %s", rec.Trials[last].Name, a.Name)
	}
	// The values as the example sidecar writes them.
	wantFilters := `{"notch":{"bandwidth (Hz)":2,"frequency (Hz)":50}}`
	if rec.Session.PowerLineHz != 50 || a.SoftwareFilters != wantFilters || a.PlacementScheme != "measured" || !strings.HasPrefix(a.PlacementDescription, "centred over") {
		t.Fatalf("sidecar gave %v %q %q %q", rec.Session.PowerLineHz, a.SoftwareFilters, a.PlacementScheme, a.PlacementDescription)
	}
	if _, ok := a.Extra["software_filters"]; ok {
		t.Error("software_filters also kept as an extra")
	}
	// The sidecar's trial exists only in the metadata: no samples to write.
	rec.Trials = rec.Trials[:last]
	for i := range rec.Trials {
		rec.Trials[i].Arrays[0].SoftwareFilters, rec.Trials[i].Arrays[0].PlacementScheme = wantFilters, "other"
	}
	path := filepath.Join(t.TempDir(), "r.h5")
	if err := recfile.Write(path, rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	view, err := recfile.MetadataView(path)
	if err != nil {
		t.Fatal(err)
	}
	if fs := validate.CheckMetadata(view); len(fs) > 0 {
		t.Fatalf("the metadata view is not valid: %v", fs)
	}
	arr := view["trials"].([]any)[0].(map[string]any)["arrays"].([]any)[0].(map[string]any)
	if f, ok := arr["software_filters"].(map[string]any); !ok || len(f) != 1 {
		t.Errorf("view software_filters %#v, want the object", arr["software_filters"])
	}
	f, err := recfile.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	back := f.Recording()
	f.Close()
	k, _ := deid.KeyFromBytes(bytes.Repeat([]byte{7}, 32))
	res, err := deid.Apply(back, deid.Options{Pseudonymizer: deid.NewPseudonymizer(k), Now: time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range []struct {
		name string
		rec  float64
		a    string
		s    string
	}{{"read back", back.Session.PowerLineHz, back.Trials[0].Arrays[0].SoftwareFilters, back.Trials[0].Arrays[0].PlacementScheme},
		{"de-identified", res.Recording.Session.PowerLineHz, res.Recording.Trials[0].Arrays[0].SoftwareFilters, res.Recording.Trials[0].Arrays[0].PlacementScheme}} {
		if r.rec != 50 || r.a != wantFilters || r.s != "other" {
			t.Errorf("%s: %v %q %q", r.name, r.rec, r.a, r.s)
		}
	}
}

// Values outside the registry's allowed values are refused by the sidecar
// reader with the member's path.
func TestStandardsFieldsRefused(t *testing.T) {
	for _, c := range []struct{ member, path string }{
		{`"power_line_hz": 55`, "/session/power_line_hz"},
		{`"power_line_hz": "50 Hz"`, "/session/power_line_hz"},
	} {
		doc := `{"study": {}, "subject": {}, "session": {` + c.member + `}, "trials": []}`
		_, err := ReadSidecar(writeTemp(t, "m.json", doc))
		if err == nil || !strings.Contains(err.Error(), c.path) {
			t.Errorf("%s: %v", c.member, err)
		}
	}
	for _, c := range []struct{ member, path string }{
		{`"placement_scheme": "Measured"`, "/trials/0/arrays/0/placement_scheme"},
		{`"software_filters": "notch 50 Hz"`, "/trials/0/arrays/0/software_filters"},
		{`"software_filters": {"notch": 50}`, "/trials/0/arrays/0/software_filters/notch"},
	} {
		doc := `{"study": {}, "subject": {}, "session": {}, "trials": [{"name": "t", "arrays": [{"name": "a", "rows": 1, "columns": 1, ` + c.member + `}]}]}`
		_, err := ReadSidecar(writeTemp(t, "m.json", doc))
		if err == nil || !strings.Contains(err.Error(), c.path) {
			t.Errorf("%s: %v", c.member, err)
		}
	}
}

// A lab's own metadata file fills session.power_line_hz through the
// profile, and a value the registry does not allow (55 Hz) is refused.
func TestStandardsFieldsFromLabMetadata(t *testing.T) {
	dir := t.TempDir()
	emg := writeTemp(t, "emg.csv", "e1\n1\n2\n3\n")
	for _, c := range []struct {
		cell string
		ok   bool
	}{{"50", true}, {"55", false}} {
		prof := DefaultProfile()
		prof.LabMetadata.Fields = map[string]string{"mains": "session.power_line_hz"}
		meta := writeTemp(t, "lab.txt", "mains: "+c.cell+"\n")
		out := filepath.Join(dir, c.cell+".h5")
		_, err := ImportRecording(Inputs{EMG: []string{emg}, LabMeta: meta, Profile: prof, RateHz: 2048}, out, recfile.WriteOptions{})
		if !c.ok {
			if err == nil || !strings.Contains(err.Error(), "55 is not a value of session.power_line_hz") {
				t.Errorf("55 Hz: %v", err)
			}
			continue
		}
		if err != nil {
			t.Fatal(err)
		}
		rec, err := recfile.ReadAll(out)
		if err != nil {
			t.Fatal(err)
		}
		if rec.Session.PowerLineHz != 50 {
			t.Errorf("power_line_hz %v", rec.Session.PowerLineHz)
		}
	}
}
