package schema

import (
	"encoding/json"
	"flag"
	"fmt"
	"os"
	"slices"
	"sort"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the generated field tables of LAYOUT.md")

// TestLayoutTables fails when a field table of LAYOUT.md differs from the
// registry's rendering; -update rewrites them.
func TestLayoutTables(t *testing.T) {
	want, err := LayoutWithTables(Layout)
	if err != nil {
		t.Fatal(err)
	}
	if *update {
		if err := os.WriteFile("LAYOUT.md", []byte(want), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	if want != Layout {
		t.Fatal("LAYOUT.md's field tables differ from schema/fields.go; run: go test ./schema -run TestLayoutTables -update")
	}
	for _, g := range Groups {
		if !strings.Contains(Layout, tableStart+g.Name+" ") {
			t.Errorf("LAYOUT.md has no field table for group %q", g.Name)
		}
	}
}

// schemaDefinition maps a registry group to the JSON Schema object that
// describes it ("" for the top level).
var schemaDefinition = map[string]string{
	"root": "", "study": "study", "subject": "subject", "session": "session",
	"trial": "trial", "signal": "signal", "array": "array", "channel": "channel",
	"decomposition": "decomposition", "unit": "unit", "muaps": "muaps",
	"derived": "derived", "derived_unit": "derived_unit",
	"source": "source", "history": "operation",
}

// containers are schema properties that hold other groups, not fields.
var containers = map[string][]string{
	"":              {"study", "subject", "session", "trials", "provenance"},
	"array":         {"channels", "decompositions"},
	"trial":         {"arrays"},
	"decomposition": {"units", "derived"},
	"derived":       {"units"},
	"signal":        {"samples"},
	"muaps":         {"units", "channels", "lags"},
}

type jsProp struct {
	Type  any    `json:"type"`
	Const any    `json:"const"`
	Ref   string `json:"$ref"`
	Enum  []any  `json:"enum"`
}

type jsObject struct {
	Properties map[string]jsProp `json:"properties"`
}

// TestRegistryMatchesJSONSchema checks field by field that
// recording.schema.json names the registry's fields, with the same value
// type and allowed values, and nothing else.
func TestRegistryMatchesJSONSchema(t *testing.T) {
	var doc struct {
		Properties  map[string]jsProp   `json:"properties"`
		Definitions map[string]jsObject `json:"definitions"`
	}
	if err := json.Unmarshal([]byte(RecordingSchema), &doc); err != nil {
		t.Fatal(err)
	}
	for _, g := range Groups {
		def, ok := schemaDefinition[g.Name]
		if !ok {
			t.Fatalf("group %q has no JSON Schema definition in the test's map", g.Name)
		}
		props := doc.Properties
		if def != "" {
			props = doc.Definitions[def].Properties
		}
		var inSchema []string
		for name := range props {
			if !slices.Contains(containers[def], name) {
				inSchema = append(inSchema, name)
			}
		}
		sort.Strings(inSchema)
		var inRegistry []string
		for _, f := range FieldsOf(g.Name) {
			inRegistry = append(inRegistry, f.Name)
			p, ok := props[f.Name]
			if !ok {
				t.Errorf("%s: registry field %q is not in recording.schema.json", g.Name, f.Name)
				continue
			}
			if want := jsonType(f.Kind); want != "" && p.Type != want && !(p.Type == nil && (p.Ref != "" || p.Const != nil)) {
				t.Errorf("%s.%s: schema type %v, registry kind %q wants %q", g.Name, f.Name, p.Type, f.Kind, want)
			}
			if want := jsonRef(f.Kind); want != "" && p.Ref != want && !(f.Kind == KindData) {
				t.Errorf("%s.%s: schema $ref %q, registry kind %q wants %q", g.Name, f.Name, p.Ref, f.Kind, want)
			}
			if !slices.Equal(enumText(p.Enum), f.Enum) {
				t.Errorf("%s.%s: schema enum %v, registry %v", g.Name, f.Name, p.Enum, f.Enum)
			}
		}
		sort.Strings(inRegistry)
		for _, n := range inSchema {
			if !slices.Contains(inRegistry, n) {
				t.Errorf("%s: recording.schema.json has %q, the registry does not", g.Name, n)
			}
		}
	}
}

// enumText writes a JSON Schema enum as the registry does: strings as
// they are, numbers in decimal.
func enumText(vs []any) []string {
	if vs == nil {
		return nil
	}
	out := make([]string, len(vs))
	for i, v := range vs {
		out[i] = fmt.Sprint(v)
	}
	return out
}

func jsonType(k Kind) string {
	switch k {
	case KindString, KindDate:
		return "string"
	case KindNumber:
		return "number"
	case KindInteger:
		return "integer"
	case KindBoolean:
		return "boolean"
	case KindJSON:
		return "object"
	}
	return ""
}

func jsonRef(k Kind) string {
	switch k {
	case KindTime:
		return "#/definitions/rfc3339"
	case KindDateTime:
		return "#/definitions/date_or_datetime"
	case KindUnit:
		return "#/definitions/ucum"
	case KindName:
		return "#/definitions/group_name"
	}
	return ""
}

// TestRegistryClasses checks that every policy field has a default action
// its class allows, and that identifying fields are not kept by default.
func TestRegistryClasses(t *testing.T) {
	seen := map[string]bool{}
	for _, f := range Fields {
		if seen[f.Path()] {
			t.Errorf("field %s is listed twice", f.Path())
		}
		seen[f.Path()] = true
		if _, ok := ClassActions[f.Class]; !ok {
			t.Errorf("%s: class %q has no actions", f.Path(), f.Class)
		}
		switch f.Class {
		case ClassCarried, ClassFile:
			if f.Default != "" {
				t.Errorf("%s: a %s field is not a policy field and has no default", f.Path(), f.Class)
			}
			continue
		}
		if !f.Allows(f.Default) {
			t.Errorf("%s: default %q is not among %v", f.Path(), f.Default, f.Actions())
		}
		if f.Identifying && f.Default == ActKeep {
			t.Errorf("%s identifies a person but the built-in policy keeps it", f.Path())
		}
		if f.Since == "" || f.Meaning == "" {
			t.Errorf("%s: Since and Meaning are required", f.Path())
		}
	}
}
