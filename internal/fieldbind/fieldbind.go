// Package fieldbind binds the field registry (schema.Fields) to the struct
// fields of the in-memory model (package record). A model struct field that
// holds a registry field carries the tag `layout:"<name>"` (`layout:",inline"`
// on a nested struct whose fields belong to the same group, such as
// record.Trial's Profile). Code that moves metadata between the model and a
// document (the sidecar reader, the sidecar writer, the HDF5 reader and
// writer) walks the registry through Bind instead of spelling each name, so
// a field added to the registry and tagged in the model is carried
// everywhere; fieldbind_test.go fails when a stored registry field has no
// tagged struct field or a tag names no registry field.
package fieldbind

import (
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"strings"

	"muarc/schema"
)

// Value is one registry field bound to the struct field that holds it.
type Value struct {
	Field schema.Field
	v     reflect.Value
}

// Bind returns the fields of the registry group that the struct *ptr holds,
// in registry order. Fields without a tagged struct field (those the
// metadata view derives from the data, ViewOnly) are left out. ptr must be
// a pointer to a struct; anything else is a programming error and panics.
func Bind(ptr any, group string) []Value {
	rv := reflect.ValueOf(ptr)
	if rv.Kind() != reflect.Pointer || rv.Elem().Kind() != reflect.Struct {
		panic(fmt.Sprintf("fieldbind: Bind wants a pointer to a struct, got %T", ptr))
	}
	tagged := map[string]reflect.Value{}
	collect(rv.Elem(), tagged)
	var out []Value
	for _, f := range schema.FieldsOf(group) {
		if v, ok := tagged[f.Name]; ok {
			out = append(out, Value{Field: f, v: v})
		}
	}
	return out
}

// Tags lists the registry names the struct type of ptr carries in its
// `layout` tags (inline structs included), for tests.
func Tags(ptr any) []string {
	tagged := map[string]reflect.Value{}
	collect(reflect.ValueOf(ptr).Elem(), tagged)
	var out []string
	for k := range tagged {
		out = append(out, k)
	}
	return out
}

func collect(v reflect.Value, into map[string]reflect.Value) {
	t := v.Type()
	for i := 0; i < t.NumField(); i++ {
		tag, ok := t.Field(i).Tag.Lookup("layout")
		if !ok {
			continue
		}
		name, opt, _ := strings.Cut(tag, ",")
		if opt == "inline" {
			collect(v.Field(i), into)
			continue
		}
		into[name] = v.Field(i)
	}
}

// Name is the field's name (its attribute, column and sidecar key).
func (b Value) Name() string { return b.Field.Name }

// Get returns the value as the metadata view holds it: string, float64,
// int64 or bool.
func (b Value) Get() any {
	switch b.v.Kind() {
	case reflect.String:
		return b.v.String()
	case reflect.Float64:
		return b.v.Float()
	case reflect.Int, reflect.Int32, reflect.Int64:
		return b.v.Int()
	case reflect.Bool:
		return b.v.Bool()
	}
	panic("fieldbind: unsupported struct field kind " + b.v.Kind().String())
}

// Set stores a value decoded from a document (JSON, YAML or HDF5): a
// string, a number (float64, int64 or int) or a bool. A JSON-text field
// (schema.KindJSON) takes an object and stores it as JSON text. A value of
// a type the field cannot hold is an error naming both.
func (b Value) Set(x any) error {
	if b.Field.Kind == schema.KindJSON && b.v.Kind() == reflect.String {
		if s, ok := x.(string); ok {
			b.v.SetString(s)
			return nil
		}
		t, err := json.Marshal(x)
		if err != nil {
			return fmt.Errorf("%s: %w", b.Field.Name, err)
		}
		b.v.SetString(string(t))
		return nil
	}
	switch b.v.Kind() {
	case reflect.String:
		if s, ok := x.(string); ok {
			b.v.SetString(s)
			return nil
		}
	case reflect.Float64:
		if f, ok := number(x); ok {
			b.v.SetFloat(f)
			return nil
		}
	case reflect.Int, reflect.Int32, reflect.Int64:
		if f, ok := number(x); ok && f == math.Trunc(f) && !math.IsInf(f, 0) {
			b.v.SetInt(int64(f))
			return nil
		}
	case reflect.Bool:
		if v, ok := x.(bool); ok {
			b.v.SetBool(v)
			return nil
		}
	}
	return fmt.Errorf("%s: a %s field cannot hold %T %v", b.Field.Name, b.Field.Kind, x, x)
}

// SetUnknown stores the value the model uses for "not known": NaN for a
// number, the zero value otherwise (also for a number with enumerated
// values, such as power_line_hz, whose model field keeps 0 for unknown).
func (b Value) SetUnknown() {
	if b.v.Kind() == reflect.Float64 && b.Field.Enum == nil {
		b.v.SetFloat(math.NaN())
		return
	}
	b.v.Set(reflect.Zero(b.v.Type()))
}

func number(x any) (float64, bool) {
	switch n := x.(type) {
	case float64:
		return n, true
	case int64:
		return float64(n), true
	case int:
		return float64(n), true
	case int32:
		return float64(n), true
	}
	return 0, false
}

// Known reports whether the value is one the layout stores: a string not
// empty, a number not NaN (nor 0 for a number with enumerated values,
// whose unknown is 0), a boolean; an integer attribute that is not
// required (adc_bits) is not known when 0. Integer table columns (a
// channel's row 0) and required fields count as known always.
func (b Value) Known() bool {
	switch b.v.Kind() {
	case reflect.String:
		return b.v.String() != ""
	case reflect.Float64:
		f := b.v.Float()
		return !math.IsNaN(f) && !(f == 0 && b.Field.Enum != nil)
	case reflect.Int, reflect.Int32, reflect.Int64:
		return b.v.Int() != 0 || b.Field.Required || schema.GroupByName(b.Field.Group).Table
	}
	return true
}

// Copy sets every field of group that both *dst and *src hold from src to
// dst (a summary struct taking its fields from the model, say) and returns
// the first value dst's struct field cannot hold.
func Copy(dst, src any, group string) error {
	from := map[string]Value{}
	for _, b := range Bind(src, group) {
		from[b.Name()] = b
	}
	for _, b := range Bind(dst, group) {
		if s, ok := from[b.Name()]; ok {
			if err := b.Set(s.Get()); err != nil {
				return err
			}
		}
	}
	return nil
}
