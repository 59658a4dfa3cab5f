package convert

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
)

// sidecarGroups are the registry groups a sidecar fills, each with the
// metadata-view path of its one object in the generated sidecar. The
// groups left out are not sidecar material: root (muarc writes it), unit,
// muaps, derived and derived_unit (the decomposition's files and muarc
// stats fill them), source and history (muarc records them);
// TestSidecarTablesRefused covers a sidecar that has them anyway.
var sidecarGroups = []struct{ group, where string }{
	{"study", "study"}, {"subject", "subject"}, {"session", "session"},
	{"trial", "trials/0"}, {"signal", "trials/0/force"}, {"array", "trials/0/arrays/0"},
	{"channel", "trials/0/arrays/0/channels/0"}, {"decomposition", "trials/0/arrays/0/decompositions/0"},
}

// formed gives a value for the string fields whose JSON Schema asks for a
// form (a pattern), which free text would not meet.
var formed = map[string]string{"height_band_cm": "170-180", "mass_band_kg": "70-80"}

// registrySidecar builds a sidecar with a value for every stored field of
// the sidecar groups, distinct within each group, that the recording JSON
// Schema accepts. Booleans take the value flag.
func registrySidecar(flag bool) map[string]any {
	objs := map[string]map[string]any{}
	for _, sg := range sidecarGroups {
		o := map[string]any{}
		nums, ints := 0, 0
		for _, f := range schema.FieldsOf(sg.group) {
			if f.ViewOnly {
				continue
			}
			var v any
			switch {
			case f.Enum != nil && f.Kind == schema.KindNumber:
				v, _ = strconv.ParseFloat(f.Enum[len(f.Enum)-1], 64)
			case f.Enum != nil:
				v = f.Enum[len(f.Enum)-1]
			case formed[f.Name] != "":
				v = formed[f.Name]
			case f.Kind == schema.KindString:
				v = fmt.Sprintf("%s %s text", sg.group, f.Name)
			case f.Kind == schema.KindName:
				v = sg.group + "_a"
			case f.Kind == schema.KindDate:
				v = "1981-02-03"
			case f.Kind == schema.KindDateTime, f.Kind == schema.KindTime:
				v = "2026-03-14T09:30:00Z"
			case f.Kind == schema.KindUnit:
				v = "N.m"
			case f.Kind == schema.KindNumber:
				nums++
				v = 10.25 + float64(nums)
			case f.Kind == schema.KindInteger:
				ints++
				v = int64(ints)
			case f.Kind == schema.KindBoolean:
				v = flag
			case f.Kind == schema.KindJSON:
				v = map[string]any{sg.group + "_step": map[string]any{"order": 4.0, "field": f.Name}}
			default:
				panic("no sidecar value for kind " + f.Kind)
			}
			o[f.Name] = v
		}
		objs[sg.where] = o
	}
	// The grid holds the channel's position (array rows and columns are
	// ints 1 and 2 above; the channel's row and column 1 and 2 as well).
	objs["trials/0/arrays/0"]["rows"], objs["trials/0/arrays/0"]["columns"] = int64(4), int64(5)
	a := objs["trials/0/arrays/0"]
	a["channels"] = []any{objs["trials/0/arrays/0/channels/0"]}
	a["decompositions"] = []any{objs["trials/0/arrays/0/decompositions/0"]}
	tr := objs["trials/0"]
	tr["force"] = objs["trials/0/force"]
	tr["arrays"] = []any{a}
	return map[string]any{"study": objs["study"], "subject": objs["subject"], "session": objs["session"], "trials": []any{tr}}
}

// TestSidecarCarriesEveryRegistryField writes a sidecar with every field
// of the registry's sidecar groups, reads it, applies it, writes the
// recording and reads the file's metadata view back (recfile.MetadataView
// lists every attribute and column it finds, by its stored name): each
// field must be there with the sidecar's value. A field the sidecar reader
// forgets, or puts in the wrong place, fails here.
func TestSidecarCarriesEveryRegistryField(t *testing.T) {
	for _, flag := range []bool{true, false} {
		doc := registrySidecar(flag)
		dir := t.TempDir()
		path := filepath.Join(dir, "meta.json")
		b, err := json.MarshalIndent(doc, "", " ")
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, b, 0o644); err != nil {
			t.Fatal(err)
		}
		sc, err := ReadSidecar(path)
		if err != nil {
			t.Fatalf("the generated sidecar is not valid: %v", err)
		}
		rec := &record.Recording{}
		sc.Apply(rec)
		if len(rec.Trials) != 1 || len(rec.Trials[0].Arrays) != 1 {
			t.Fatalf("trials %+v", rec.Trials)
		}
		// The data themselves come from the signal files: add them.
		tr := &rec.Trials[0]
		tr.Force.Values = []float64{1, 2, 3}
		ar := &tr.Arrays[0]
		ar.Samples = &record.MemSamples{Samples: 3, Channels: 1, F32: []float32{1, 2, 3}}
		out := filepath.Join(dir, "rec.h5")
		if err := recfile.Write(out, rec, recfile.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
		view, err := recfile.MetadataView(out)
		if err != nil {
			t.Fatal(err)
		}
		n := 0
		for _, sg := range sidecarGroups {
			want := lookupPointer(doc, sg.where)
			got := lookupPointer(view, sg.where)
			for _, f := range schema.FieldsOf(sg.group) {
				if f.ViewOnly {
					continue
				}
				n++
				w, g := want[f.Name], got[f.Name]
				if !sameStored(w, g) {
					t.Errorf("booleans %v: %s (%s): sidecar %v (%T), stored %v (%T)", flag, f.Path(), sg.where, w, w, g, g)
				}
			}
		}
		if n < 60 {
			t.Fatalf("only %d fields compared", n)
		}
	}
}

// lookupPointer follows a slash path of member names and list indices.
func lookupPointer(v map[string]any, path string) map[string]any {
	var cur any = v
	for _, p := range strings.Split(path, "/") {
		switch c := cur.(type) {
		case map[string]any:
			cur = c[p]
		case []any:
			var i int
			fmt.Sscan(p, &i)
			if i >= len(c) {
				return nil
			}
			cur = c[i]
		}
	}
	m, _ := cur.(map[string]any)
	return m
}

// sameStored compares a sidecar's value with the stored one: numbers by
// value, anything else (text, booleans, JSON objects) by its JSON text.
func sameStored(a, b any) bool {
	if x, ok := asFloat(a); ok {
		y, ok := asFloat(b)
		return ok && x == y
	}
	ja, _ := json.Marshal(a)
	jb, _ := json.Marshal(b)
	return string(ja) == string(jb)
}

// The force trace's unit: the file's header, else the sidecar's
// trials[].force.unit; a header and a sidecar that disagree are refused
// naming both (nothing is written).
func TestForceUnitFromSidecar(t *testing.T) {
	meta := writeTemp(t, "meta.json", `{"study": {"id": "s"}, "subject": {"id": "P1"}, "session": {"id": "P1-1"},
 "trials": [{"name": "t1", "force": {"sampling_rate_hz": 100, "unit": "N.m"}}]}`)
	for _, c := range []struct{ header, want, refuse string }{
		{"time [s],force", "N.m", ""},
		{"time [s],force [N.m]", "N.m", ""},
		{"time [s],force [N]", "", `force unit "N", the metadata says "N.m"`},
	} {
		force := writeTemp(t, "force.csv", c.header+"\n0,1\n0.01,2\n0.02,3\n")
		out := filepath.Join(t.TempDir(), "x.h5")
		_, err := ImportRecording(Inputs{Meta: meta, Force: []string{force}}, out, recfile.WriteOptions{})
		if c.refuse != "" {
			if err == nil || !strings.Contains(err.Error(), c.refuse) {
				t.Errorf("%s: %v, want %q", c.header, err, c.refuse)
			}
			if _, serr := os.Stat(out); serr == nil {
				t.Errorf("%s: output written", c.header)
			}
			continue
		}
		if err != nil {
			t.Fatalf("%s: %v", c.header, err)
		}
		r, err := recfile.ReadAll(out)
		if err != nil {
			t.Fatal(err)
		}
		if u := r.Trials[0].Force.Unit; u != c.want {
			t.Errorf("%s: force unit %q, want %q", c.header, u, c.want)
		}
	}
}
