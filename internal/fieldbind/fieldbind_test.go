package fieldbind

import (
	"math"
	"reflect"
	"slices"
	"strings"
	"testing"

	"muarc/record"
	"muarc/schema"
)

// modelOf gives, per registry group held as attributes or a small table in
// the model, a pointer to the record struct that holds it. Groups left out
// and why:
//   - root: written by recfile itself (layout name, version, time, digest);
//   - derived, derived_unit, source, history: read and written column by
//     column by recfile's table code (recfile/write_tables.go and
//     read_tables.go), never through a sidecar.
var modelOf = map[string]func() any{
	"study":         func() any { return &record.Study{} },
	"subject":       func() any { return &record.Subject{} },
	"session":       func() any { return &record.Session{} },
	"trial":         func() any { return &record.Trial{} },
	"signal":        func() any { return &record.Signal{} },
	"array":         func() any { return &record.Array{} },
	"channel":       func() any { return &record.Channel{} },
	"decomposition": func() any { return &record.Decomposition{} },
	"muaps":         func() any { return &record.MUAPs{} },
	"unit":          func() any { return &record.Unit{} },
}

// derivedFromData are stored registry fields the model computes from
// other data instead of holding them: a unit's discharge_count is the
// length of its discharge list.
var derivedFromData = map[string]bool{"unit.discharge_count": true}

// TestEveryFieldBound fails when a stored registry field of a bound group
// has no tagged struct field in the model, or a tag names no registry field
// of its group: the two ways a field could be left behind by the sidecar
// reader and writer and the HDF5 reader and writer.
func TestEveryFieldBound(t *testing.T) {
	for group, mk := range modelOf {
		ptr := mk()
		bound := map[string]bool{}
		for _, b := range Bind(ptr, group) {
			bound[b.Name()] = true
		}
		for _, f := range schema.FieldsOf(group) {
			if f.ViewOnly {
				if bound[f.Name] {
					t.Errorf("%s.%s is derived from the data (ViewOnly) but tagged in the model", group, f.Name)
				}
				continue
			}
			if !bound[f.Name] && !derivedFromData[group+"."+f.Name] {
				t.Errorf("%s.%s: no struct field of %T carries `layout:%q`", group, f.Name, ptr, f.Name)
			}
		}
		for _, tag := range Tags(ptr) {
			if !slices.Contains(schema.FieldNames(group, false), tag) {
				t.Errorf("%T carries `layout:%q`, which the registry group %q does not have", ptr, tag, group)
			}
		}
	}
	for _, g := range schema.Groups {
		if _, ok := modelOf[g.Name]; !ok && !g.Table && g.Name != "root" && g.Name != "derived" {
			t.Errorf("registry group %q has no model type in the test; bind it or say why not", g.Name)
		}
	}
}

// Set and Get carry each kind unchanged, and Set refuses a value of the
// wrong type instead of storing a zero.
func TestSetGet(t *testing.T) {
	var a record.Array
	got := map[string]any{}
	for _, b := range Bind(&a, "array") {
		var x any
		switch b.Field.Kind {
		case schema.KindNumber:
			x = 2.5
		case schema.KindInteger:
			x = int64(7)
		default:
			x = "v-" + b.Name()
		}
		if err := b.Set(x); err != nil {
			t.Fatal(err)
		}
		got[b.Name()] = x
	}
	if a.IEDMm != 2.5 || a.Rows != 7 || a.ADCBits != 7 || a.Muscle != "v-muscle" || a.Unit != "v-unit" {
		t.Fatalf("array after Set: %+v", a)
	}
	for _, b := range Bind(&a, "array") {
		if b.Get() != got[b.Name()] {
			t.Errorf("%s: Get %v, Set %v", b.Name(), b.Get(), got[b.Name()])
		}
	}
	var d record.Decomposition
	for _, b := range Bind(&d, "decomposition") {
		switch b.Name() {
		case "parameters":
			if err := b.Set(map[string]any{"k": 1.0}); err != nil {
				t.Fatal(err)
			}
		case "edited_by_hand":
			if err := b.Set("yes"); err == nil {
				t.Error("a string was stored in a boolean field")
			}
		}
	}
	if d.Parameters != `{"k":1}` {
		t.Errorf("parameters %q", d.Parameters)
	}
	var s record.Subject
	for _, b := range Bind(&s, "subject") {
		b.SetUnknown()
	}
	if !math.IsNaN(s.AgeYears) || !math.IsNaN(s.HeightCm) || s.Name != "" {
		t.Errorf("unknown subject %+v", s)
	}
	for _, b := range Bind(&a, "array") {
		if b.Name() == "rows" {
			if err := b.Set(2.5); err == nil {
				t.Error("2.5 was stored in an integer field")
			}
		}
	}
}

// TestTagsSpellFieldNames catches two tags swapped between struct fields
// (which the sidecar, HDF5 and registry tests cannot see, as all of them
// go through the same binding): by the model's naming convention a tag is
// the Go field's name in snake case (IEDMm: ied_mm), optionally with the
// name of the inline struct before it (Profile.Shape: profile_shape).
func TestTagsSpellFieldNames(t *testing.T) {
	squash := func(s string) string { return strings.ToLower(strings.ReplaceAll(s, "_", "")) }
	var walk func(rt reflect.Type, prefix string)
	walk = func(rt reflect.Type, prefix string) {
		for i := 0; i < rt.NumField(); i++ {
			sf := rt.Field(i)
			tag, ok := sf.Tag.Lookup("layout")
			if !ok {
				continue
			}
			if tag == ",inline" {
				walk(sf.Type, sf.Name)
				continue
			}
			if squash(tag) != squash(sf.Name) && squash(tag) != squash(prefix+sf.Name) {
				t.Errorf("%s.%s carries `layout:%q`: a tag spells its field's name", rt.Name(), sf.Name, tag)
			}
		}
	}
	for _, mk := range modelOf {
		walk(reflect.TypeOf(mk()).Elem(), "")
	}
}
