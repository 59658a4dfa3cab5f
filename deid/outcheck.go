package deid

import (
	"fmt"
	"reflect"
	"regexp"
	"slices"
	"sort"
	"strings"
	"time"
	"unicode"

	"muarc/record"
	"muarc/schema"
)

// This file is the output check: every string a de-identified recording
// will carry (attributes, string columns, extra fields and their names,
// channel labels, group names, provenance) is searched for the original
// identifying values before anything is written. A dry run runs the same
// check.

// absPath finds absolute file paths in text: "/home/...", "C:\...", "\\host\...".
var absPath = regexp.MustCompile(`(?:^|[\s"'=:(,\[])(?:/[A-Za-z0-9._~\-]+){2,}|\b[A-Za-z]:[\\/][A-Za-z0-9._ \-]+|\\\\[A-Za-z0-9._\-]+\\`)

// Finding is one string of an output that still holds an original
// identifying value or an absolute path. Values are masked.
type Finding struct {
	// Path is the concrete metadata-view path ("trials[0].arrays[1].channels[3].label").
	Path string `json:"path"`
	// HDF5 is where the string sits in the file ("/trials/<trial>/...").
	HDF5 string `json:"hdf5,omitempty"`
	// What says what was found (masked).
	What string `json:"what"`
	// Fix is the policy line that would take the value out, offering only
	// the actions the field allows; "" when no policy line can.
	Fix string `json:"fix,omitempty"`
}

func (f Finding) String() string {
	s := f.Path
	if f.HDF5 != "" {
		s += " (" + f.HDF5 + ")"
	}
	s += " " + f.What
	if f.Fix != "" {
		s += "; " + f.Fix
	}
	return s
}

// nameSuffix marks a path whose string is the name of an extra field or
// column rather than its value.
const nameSuffix = " (its name)"

// checkStrings returns a finding for every string of r that holds one of
// the needles or an absolute path.
func checkStrings(r *record.Recording, needles []string) []Finding {
	var out []Finding
	walkStrings(r, func(path, s string) {
		if s == "" {
			return
		}
		if hits := scanText(s, needles); len(hits) > 0 {
			out = append(out, finding(r, path, s, "still holds an original identifying value "+maskValue(hits[0])))
		}
		if absPath.MatchString(s) {
			out = append(out, finding(r, path, s, "holds an absolute file path"))
		}
	})
	sort.Slice(out, func(i, j int) bool { return out[i].Path < out[j].Path })
	return out
}

// finding names the HDF5 place of a path holding value and the policy line
// that fixes it.
func finding(r *record.Recording, path, value, what string) Finding {
	f := Finding{Path: path, HDF5: hdf5Place(r, strings.TrimSuffix(path, nameSuffix)), What: what}
	pp := policyPath(strings.TrimSuffix(path, nameSuffix))
	acts := fixActions(pp)
	if c, _ := classOf(pp); c == extraClass && DateSpellings(value) == nil {
		// shift and year only apply to a date; on other text they drop it
		acts = slices.DeleteFunc(acts, func(a Action) bool { return a == Shift || a == Year })
	}
	switch {
	case len(acts) > 0:
		f.Fix = fmt.Sprintf("fix: set the policy line %q to %s", pp, joinActions(acts))
	case strings.HasPrefix(pp, "provenance.history[]."):
		f.Fix = "fix: the policy cannot change this; it is written by muarc (report it as a defect)"
	default:
		f.Fix = "fix: no policy line changes this recorded value; correct it in the original (muarc import) and de-identify again"
	}
	return f
}

// checkOutput fails when a string of the de-identified recording still
// holds an original identifying value or an absolute path, or uses a name
// part that is an ordinary word as a name or code, or holds one of more
// (another subject's name); it returns a note for each value that uses such
// a part as a word.
func checkOutput(r *record.Recording, needles []string, wc *wordCheck, more []Finding) ([]string, error) {
	fs := checkStrings(r, needles)
	wf, notes := checkWords(r, wc)
	if fs = mergeFindings(fs, append(wf, more...)); len(fs) > 0 {
		return nil, &OutputError{Findings: fs}
	}
	return notes, nil
}

// mergeFindings joins two sorted lists of findings, sorted by path.
func mergeFindings(a, b []Finding) []Finding {
	out := append(append([]Finding(nil), a...), b...)
	sort.SliceStable(out, func(i, j int) bool { return out[i].Path < out[j].Path })
	return out
}

// OutputError is the refusal of an output whose strings still identify.
type OutputError struct {
	Findings []Finding
	// Leaks are matches in the written file's raw bytes (masked), when the
	// file was written and scanned.
	Leaks []string
}

func (e *OutputError) Error() string {
	var parts []string
	for _, f := range e.Findings {
		parts = append(parts, f.String())
	}
	if len(e.Leaks) > 0 {
		parts = append(parts, fmt.Sprintf("leak scan of the written bytes: %s", strings.Join(e.Leaks, ", ")))
	}
	return "not written, it would still identify: " + strings.Join(parts, "; ")
}

// hdf5Place turns a concrete metadata-view path into the HDF5 object that
// holds it, with the group names of r ("/trials/ramp_30pct/arrays/ta_grid/channels/label").
func hdf5Place(r *record.Recording, path string) string {
	var b strings.Builder
	var t *record.Trial
	var a *record.Array
	parts := strings.Split(path, ".")
	for i, p := range parts {
		name, idx := p, -1
		if k := strings.IndexByte(p, '['); k >= 0 {
			fmt.Sscanf(p[k:], "[%d]", &idx)
			name = p[:k]
		}
		switch {
		case name == "trials" && idx >= 0 && idx < len(r.Trials):
			t = &r.Trials[idx]
			b.WriteString("/trials/" + t.Name)
		case name == "arrays" && t != nil && idx >= 0 && idx < len(t.Arrays):
			a = &t.Arrays[idx]
			b.WriteString("/arrays/" + a.Name)
		case name == "decompositions" && a != nil && idx >= 0 && idx < len(a.Decompositions):
			b.WriteString("/decompositions/" + a.Decompositions[idx].Name)
		case name == "extra":
			rest := strings.Join(parts[i+1:], ".")
			if i > 0 && strings.HasPrefix(parts[i-1], "units") {
				return b.String() + "/" + rest + fmt.Sprintf(", row %d", idx0(parts[i-1]))
			}
			return "attribute " + rest + " of " + b.String()
		case i == len(parts)-1:
			if name == "name" && i > 0 && (strings.HasPrefix(parts[i-1], "trials[") || strings.HasPrefix(parts[i-1], "arrays[") || strings.HasPrefix(parts[i-1], "decompositions[")) {
				return "the name of group " + b.String()
			}
			if i > 0 && strings.HasSuffix(parts[i-1], "]") && (strings.HasPrefix(parts[i-1], "channels") || strings.HasPrefix(parts[i-1], "units") || strings.HasPrefix(parts[i-1], "sources") || strings.HasPrefix(parts[i-1], "history")) {
				return b.String() + "/" + name + fmt.Sprintf(", row %d", idx0(parts[i-1]))
			}
			if b.Len() == 0 {
				b.WriteString("/")
			}
			return "attribute " + name + " of " + b.String()
		default:
			b.WriteString("/" + name)
		}
	}
	return b.String()
}

func idx0(p string) int {
	i := -1
	if k := strings.IndexByte(p, '['); k >= 0 {
		fmt.Sscanf(p[k:], "[%d]", &i)
	}
	return i
}

// walkStrings calls fn with every string a recording writes into a file
// and its concrete metadata-view path. It walks the record model by
// reflection, so a string field added to the model is checked without
// being listed here; names come from the field registry.
func walkStrings(r *record.Recording, fn func(path, s string)) {
	walkValue(reflect.ValueOf(r).Elem(), "", fn)
}

var (
	timeType = reflect.TypeOf(time.Time{})
	// sourceType is the samples' stream: numbers only, whatever the
	// concrete reader behind it holds (file handles, caches), so the walk
	// does not enter it.
	sourceType = reflect.TypeOf((*record.SampleSource)(nil)).Elem()
)

func walkValue(v reflect.Value, path string, fn func(path, s string)) {
	switch v.Kind() {
	case reflect.String:
		fn(path, v.String())
	case reflect.Pointer, reflect.Interface:
		if !v.IsNil() {
			walkValue(v.Elem(), path, fn)
		}
	case reflect.Slice:
		if v.Type() == reflect.TypeOf([]record.Column(nil)) {
			walkColumns(v.Interface().([]record.Column), path, fn)
			return
		}
		if !mayHoldStrings(v.Type().Elem()) {
			return // samples, discharges, figures
		}
		for i := 0; i < v.Len(); i++ {
			walkValue(v.Index(i), fmt.Sprintf("%s[%d]", path, i), fn)
		}
	case reflect.Map:
		keys := v.MapKeys()
		sort.Slice(keys, func(i, j int) bool { return keys[i].String() < keys[j].String() })
		for _, k := range keys {
			p := path + "." + k.String()
			fn(p+nameSuffix, k.String())
			walkValue(v.MapIndex(k), p, fn)
		}
	case reflect.Struct:
		if v.Type() == timeType {
			if t := v.Interface().(time.Time); !t.IsZero() {
				fn(path, t.UTC().Format(time.RFC3339Nano))
			}
			return
		}
		for i := 0; i < v.NumField(); i++ {
			sf := v.Type().Field(i)
			if !sf.IsExported() {
				continue
			}
			fv := v.Field(i)
			if sf.Type == sourceType {
				continue
			}
			if sf.Anonymous || sf.Type == reflect.TypeOf(record.ForceProfile{}) {
				walkFlat(fv, path, sf.Name, fn)
				continue
			}
			walkValue(fv, join(path, viewName(path, sf.Name)), fn)
		}
	}
}

// walkFlat walks a struct whose fields the layout stores flat in the parent
// group ("Profile.Shape" is "profile_shape").
func walkFlat(v reflect.Value, path, prefix string, fn func(path, s string)) {
	for i := 0; i < v.NumField(); i++ {
		sf := v.Type().Field(i)
		walkValue(v.Field(i), join(path, viewName(path, prefix+sf.Name)), fn)
	}
}

// walkColumns reports extra unit columns as their metadata-view paths:
// "<decomposition>.units[i].extra.<name>" per cell, and the name and unit.
func walkColumns(cols []record.Column, path string, fn func(path, s string)) {
	base := strings.TrimSuffix(path, ".extra_columns")
	for _, c := range cols {
		p := base + ".units[]." + "extra." + c.Name
		fn(p+nameSuffix, c.Name)
		fn(p+".unit", c.Unit)
		for i, s := range c.Text {
			fn(fmt.Sprintf("%s.units[%d].extra.%s", base, i, c.Name), s)
		}
	}
}

// mayHoldStrings reports whether a value of type t can hold a string.
func mayHoldStrings(t reflect.Type) bool {
	switch t.Kind() {
	case reflect.String, reflect.Interface, reflect.Map:
		return true
	case reflect.Pointer, reflect.Slice, reflect.Array:
		return mayHoldStrings(t.Elem())
	case reflect.Struct:
		if t == timeType {
			return true
		}
		for i := 0; i < t.NumField(); i++ {
			if mayHoldStrings(t.Field(i).Type) {
				return true
			}
		}
	}
	return false
}

func join(path, name string) string {
	if path == "" {
		return name
	}
	return path + "." + name
}

// goNames maps model field names whose metadata-view name is not their
// snake-case spelling.
var goNames = map[string]string{"ExtraColumns": "extra_columns", "LayoutVersion": "layout_version"}

// viewName is the metadata-view name of a model field under the group at
// path: the registry's name when one matches it (ignoring case and "_"),
// else its snake-case spelling.
func viewName(path, goName string) string {
	if n, ok := goNames[goName]; ok {
		return n
	}
	want := strings.ToLower(goName)
	prefix := policyPath(path)
	for _, f := range schema.Fields {
		if strings.ReplaceAll(f.Name, "_", "") != want {
			continue
		}
		if g := schema.GroupByName(f.Group); g.Prefix == prefix || g.Prefix == prefix+"[]" {
			return f.Name
		}
	}
	return snake(goName)
}

func snake(s string) string {
	var b strings.Builder
	rs := []rune(s)
	for i, r := range rs {
		if unicode.IsUpper(r) {
			if i > 0 && (unicode.IsLower(rs[i-1]) || i+1 < len(rs) && unicode.IsLower(rs[i+1])) {
				b.WriteByte('_')
			}
			r = unicode.ToLower(r)
		}
		b.WriteRune(r)
	}
	return b.String()
}
