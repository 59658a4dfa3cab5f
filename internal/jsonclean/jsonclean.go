// Package jsonclean turns Go values into plain JSON values in which unknown
// numbers (NaN, ±Inf, which encoding/json refuses) are left out of objects
// and written as null in lists, where a position must be kept.
package jsonclean

import (
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"strings"
)

// Clean returns v as plain JSON values (maps, lists, numbers, strings,
// booleans), following json struct tags, embedded structs and omitempty.
// Unknown numbers are dropped from objects and null in lists.
func Clean(v any) any {
	b, err := json.Marshal(value(reflect.ValueOf(v)))
	if err != nil {
		return map[string]any{"error": err.Error()}
	}
	var out any
	if err := json.Unmarshal(b, &out); err != nil {
		return map[string]any{"error": err.Error()}
	}
	return out
}

func value(v reflect.Value) any {
	switch v.Kind() {
	case reflect.Invalid:
		return nil
	case reflect.Pointer, reflect.Interface:
		if v.IsNil() {
			return nil
		}
		return value(v.Elem())
	case reflect.Float32, reflect.Float64:
		f := v.Float()
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return nil
		}
		return f
	case reflect.Slice, reflect.Array:
		if v.Kind() == reflect.Slice && v.IsNil() {
			return []any{}
		}
		out := make([]any, v.Len())
		for i := range out {
			out[i] = value(v.Index(i))
		}
		return out
	case reflect.Map:
		out := map[string]any{}
		for _, k := range v.MapKeys() {
			if c := value(v.MapIndex(k)); c != nil {
				out[fmt.Sprint(k.Interface())] = c
			}
		}
		return out
	case reflect.Struct:
		if m, ok := v.Interface().(json.Marshaler); ok {
			return m
		}
		out := map[string]any{}
		addStruct(out, v)
		return out
	}
	return v.Interface()
}

func addStruct(out map[string]any, v reflect.Value) {
	t := v.Type()
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		if !f.IsExported() {
			continue
		}
		tag := f.Tag.Get("json")
		if tag == "-" {
			continue
		}
		name, opts, _ := strings.Cut(tag, ",")
		if f.Anonymous && name == "" && f.Type.Kind() == reflect.Struct {
			addStruct(out, v.Field(i))
			continue
		}
		if name == "" {
			name = f.Name
		}
		fv := v.Field(i)
		if strings.Contains(opts, "omitempty") && fv.IsZero() {
			continue
		}
		if c := value(fv); c != nil {
			out[name] = c
		}
	}
}
