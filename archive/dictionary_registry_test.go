package archive

import (
	"strconv"
	"strings"
	"testing"

	"muarc/schema"
)

// The data dictionary agrees with the field registry (schema/fields.go),
// which schema/fields_test.go holds against the JSON Schema and LAYOUT.md's
// tables: every registry field is listed at its path, with the registry's
// unit, requiredness (a field every file has), JSON type and allowed values.
func TestDictionaryMatchesRegistry(t *testing.T) {
	d, err := DataDictionary()
	if err != nil {
		t.Fatal(err)
	}
	have := map[string]DictEntry{}
	for _, e := range d {
		have[e.Field] = e
	}
	for _, f := range schema.Fields {
		e, ok := have[f.Path()]
		if !ok {
			t.Errorf("registry field %s is not in the data dictionary", f.Path())
			continue
		}
		if f.Unit != "" && e.Unit != f.Unit {
			t.Errorf("%s: dictionary unit %q, registry %q", f.Path(), e.Unit, f.Unit)
		}
		if f.Unit == "" && (f.Kind == schema.KindNumber || f.Kind == schema.KindInteger) && e.Unit != "" && !strings.HasPrefix(e.Unit, "(") {
			t.Errorf("%s: dictionary unit %q, the registry gives none", f.Path(), e.Unit)
		}
		if f.Required && !e.Required {
			t.Errorf("%s: every file has it (registry), the dictionary says it is not required", f.Path())
		}
		if want := dictType(f.Kind); want != "" && e.Type != want && e.Type != "array of "+want {
			t.Errorf("%s: dictionary type %q, registry kind %q", f.Path(), e.Type, f.Kind)
		}
		for _, v := range f.Enum {
			if dictType(f.Kind) == "string" {
				v = strconv.Quote(v) // numbers are listed as numbers
			}
			if !strings.Contains(e.Allowed, v) {
				t.Errorf("%s: dictionary allows %q, registry value %q missing", f.Path(), e.Allowed, v)
			}
		}
	}
}

func dictType(k schema.Kind) string {
	switch k {
	case schema.KindNumber:
		return "number"
	case schema.KindInteger:
		return "integer"
	case schema.KindBoolean:
		return "boolean"
	case schema.KindString, schema.KindDate, schema.KindTime, schema.KindDateTime, schema.KindUnit, schema.KindName:
		return "string"
	}
	return ""
}
