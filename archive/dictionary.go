package archive

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"sort"
	"strconv"
	"strings"

	"muarc/schema"
)

// DictEntry is one field of the recording metadata view, as the data
// dictionary in a deposit lists it.
type DictEntry struct {
	// Field is the dotted path in the metadata view; "[]" marks a list,
	// e.g. "trials[].arrays[].sampling_rate_hz".
	Field string `json:"field"`
	// Type is the JSON type ("string", "number", "integer", "boolean",
	// "object", "array of number", ...).
	Type string `json:"type"`
	// Unit is the UCUM unit of the value, "1" for a dimensionless number,
	// or "" when the field has no unit (text, identifiers, flags, counts).
	Unit string `json:"unit"`
	// Required is true when every file has the field (the field registry,
	// schema.Fields) or the schema requires it in its object.
	Required bool `json:"required"`
	// Meaning is the schema's description of the field.
	Meaning string `json:"meaning"`
	// Allowed states the schema's constraints in words (enum, range,
	// pattern), or "".
	Allowed string `json:"allowed,omitempty"`
	// HDF5 says where the field is stored in a file: an attribute
	// ("/subject @height_cm"), a table column, a dataset or its shape.
	HDF5 string `json:"hdf5"`
}

// DataDictionary lists every field of the metadata view described by
// schema.RecordingSchema: its meaning, JSON type and unit. A field of the
// field registry (schema.Fields) takes its unit and requiredness from the
// registry. For the others (list lengths, template shapes) units come from
// an explicit "x-unit" keyword when the schema has one, else from the field
// name's suffix (the layout names numbers by their unit: _hz, _s, _mm, _cm,
// _kg, _db, _pps, _pct, _pct_mvc, _years), else from "dimensionless" in the
// description. Fields appear in the schema's order.
func DataDictionary() ([]DictEntry, error) {
	root, err := parseOrdered([]byte(schema.RecordingSchema))
	if err != nil {
		return nil, fmt.Errorf("schema/recording.schema.json: %w", err)
	}
	top, ok := root.(ordered)
	if !ok {
		return nil, fmt.Errorf("schema/recording.schema.json: top level is not an object")
	}
	defs, _ := top.get("definitions").(ordered)
	w := &dictWalker{defs: defs}
	w.object("", top, 0)
	if len(w.out) == 0 {
		return nil, fmt.Errorf("schema/recording.schema.json: no fields found (is the schema empty?)")
	}
	return w.out, nil
}

type dictWalker struct {
	defs ordered
	out  []DictEntry
}

// resolve follows "$ref": "#/definitions/x" chains, merging the referring
// object's own description over the target's.
func (w *dictWalker) resolve(s ordered) ordered {
	for i := 0; i < 16; i++ {
		ref, ok := s.get("$ref").(string)
		if !ok {
			return s
		}
		name, found := strings.CutPrefix(ref, "#/definitions/")
		target, _ := w.defs.get(name).(ordered)
		if !found || target == nil {
			return s
		}
		merged := append(ordered(nil), target...)
		for _, kv := range s {
			if kv.k != "$ref" {
				merged = merged.set(kv.k, kv.v)
			}
		}
		s = merged
	}
	return s
}

func (w *dictWalker) object(prefix string, s ordered, depth int) {
	if depth > 12 {
		return
	}
	req := map[string]bool{}
	if r, ok := s.get("required").([]any); ok {
		for _, v := range r {
			if n, ok := v.(string); ok {
				req[n] = true
			}
		}
	}
	props, _ := s.get("properties").(ordered)
	for _, kv := range props {
		sub, ok := kv.v.(ordered)
		if !ok {
			continue
		}
		sub = w.resolve(sub)
		name := kv.k
		if prefix != "" {
			name = prefix + "." + kv.k
		}
		typ := jsonType(sub)
		e := DictEntry{Field: name, Required: req[kv.k], Meaning: str(sub.get("description"))}
		switch typ {
		case "object":
			e.Type = "object"
			w.add(e)
			w.object(name, sub, depth+1)
			continue
		case "array":
			items, _ := sub.get("items").(ordered)
			items = w.resolve(items)
			it := jsonType(items)
			if it == "object" {
				e.Type = "array of object"
				w.add(e)
				w.object(name+"[]", items, depth+1)
				continue
			}
			e.Type = "array of " + it
			e.Unit = unitOf(kv.k, sub, items)
			e.Allowed = allowed(items)
		default:
			e.Type = typ
			e.Unit = unitOf(kv.k, sub, nil)
			e.Allowed = allowed(sub)
		}
		w.add(e)
	}
	if ap, ok := s.get("additionalProperties").(ordered); ok && prefix != "" {
		ap = w.resolve(ap)
		w.add(DictEntry{Field: prefix + ".*", Type: jsonType(ap),
			Meaning: firstNonEmpty(str(ap.get("description")), "Any further field, kept as given.")})
	}
}

func (w *dictWalker) add(e DictEntry) {
	e.HDF5 = hdf5Location(e.Field)
	fromRegistry(&e)
	w.out = append(w.out, e)
}

// fromRegistry sets the unit of a field the registry (schema.Fields) has
// from it: the registry's unit, or none (a reference to a unit field such
// as "(mvc_unit)" stays). A field every file has (the registry's Required)
// is required, as is one the JSON Schema requires in its object.
func fromRegistry(e *DictEntry) {
	f, ok := schema.FieldByPath(e.Field)
	if !ok {
		return
	}
	e.Required = e.Required || f.Required
	if f.Unit != "" || !strings.HasPrefix(e.Unit, "(") {
		e.Unit = f.Unit
	}
}

// hdf5Location says where a metadata-view field lives in a file, following
// the layout: "@name" is an attribute, "name/" a group, a column is a 1-D
// dataset of a table group, "<trial>" stands for each trial's group name.
func hdf5Location(field string) string {
	parts := strings.Split(field, ".")
	path := ""
	for i, p := range parts {
		last := i == len(parts)-1
		list := strings.HasSuffix(p, "[]")
		name := strings.TrimSuffix(p, "[]")
		parent := parts[max(i-1, 0)]
		switch {
		case path == "" && !last && !list:
			path = "/" + name // study, subject, session, provenance
		case list && (name == "trials" || name == "arrays" || name == "decompositions"):
			path += "/" + name + "/<" + strings.TrimSuffix(name, "s") + ">"
			if last {
				return path + " (one group each)"
			}
		case list: // table groups: channels, units, sources, history
			if path == "" {
				path = "/" + name
			} else {
				path += "/" + name
			}
			if last {
				return path + "/ (one row each)"
			}
		case !last:
			path += "/" + name // force, force_target, muaps
		}
		if !last {
			continue
		}
		table := strings.HasSuffix(parent, "[]") && !strings.HasPrefix(parent, "trials") &&
			!strings.HasPrefix(parent, "arrays") && !strings.HasPrefix(parent, "decompositions") && i > 0
		switch {
		case name == "trials" || name == "arrays" || name == "decompositions":
			return path + "/" + name + "/ (one group each)"
		case table && (name == "details" || name == "parameters"):
			return path + "/" + name + " (column, JSON text)"
		case name == "*" && table:
			return path + "/<column> (extra column)"
		case name == "*":
			return orRoot(path) + " @<name> (extra attribute)"
		case name == "name" && strings.HasSuffix(parent, "[]") && !table:
			return "group name of " + path
		case table:
			return path + "/" + name + " (column)"
		case path == "" && (name == "study" || name == "subject" || name == "session" || name == "provenance"):
			return "/" + name + " (group)"
		case path == "":
			return "/ @" + name
		case name == "samples" && (parent == "force" || parent == "force_target"):
			return "length of " + path
		case name == "force" || name == "force_target" || name == "muaps":
			return path + "/" + name + " (dataset)"
		case name == "sample_type":
			return "element type of " + path + "/samples"
		case name == "samples":
			return "rows of " + path + "/samples"
		case name == "channel_count":
			return "columns of " + path + "/samples"
		case parent == "muaps" && (name == "units" || name == "channels" || name == "lags"):
			return map[string]string{"units": "dimension 0", "channels": "dimension 1", "lags": "dimension 2"}[name] + " of " + path
		case name == "channels" || name == "units" || name == "sources" || name == "history":
			return path + "/" + name + "/ (table group)"
		case name == "parameters" || name == "details":
			return path + " @" + name + " (JSON text)"
		}
		return orRoot(path) + " @" + name
	}
	return ""
}

func orRoot(p string) string {
	if p == "" {
		return "/"
	}
	return p
}

// jsonType names a schema's JSON type.
func jsonType(s ordered) string {
	if s == nil {
		return "any"
	}
	switch t := s.get("type").(type) {
	case string:
		return t
	case []any:
		var parts []string
		for _, v := range t {
			parts = append(parts, str(v))
		}
		return strings.Join(parts, " or ")
	}
	if c := s.get("const"); c != nil {
		switch c.(type) {
		case string:
			return "string"
		case bool:
			return "boolean"
		case json.Number:
			return "number"
		}
	}
	if s.get("properties") != nil {
		return "object"
	}
	if s.get("enum") != nil {
		return "string"
	}
	return "any"
}

// unitSuffixes maps a field-name suffix to its UCUM unit, longest first.
var unitSuffixes = []struct{ suffix, unit string }{
	{"_pct_mvc", "%"}, // percent of the maximal voluntary contraction
	{"_years", "a"},   // UCUM year
	{"_pps", "/s"},    // pulses per second
	{"_pct", "%"},
	{"_hz", "Hz"},
	{"_mm", "mm"},
	{"_cm", "cm"},
	{"_kg", "kg"},
	{"_db", "dB"},
	{"_ms", "ms"},
	{"_s", "s"},
}

func unitOf(name string, s, items ordered) string {
	for _, src := range []ordered{s, items} {
		if u, ok := src.get("x-unit").(string); ok {
			return u
		}
	}
	t := jsonType(s)
	if items != nil {
		t = jsonType(items)
	}
	if t != "number" && t != "integer" {
		return ""
	}
	for _, us := range unitSuffixes {
		if strings.HasSuffix(name, us.suffix) {
			return us.unit
		}
	}
	desc := str(s.get("description"))
	if strings.Contains(strings.ToLower(desc), "dimensionless") || strings.Contains(desc, "(count)") ||
		strings.HasPrefix(desc, "Number of") || strings.HasSuffix(desc, "count (units).") {
		return "1"
	}
	if strings.Contains(desc, "in mvc_unit") {
		return "(mvc_unit)"
	}
	// A description ending ", <unit>." names the unit in words.
	if i := strings.LastIndex(desc, ", "); i >= 0 && strings.HasSuffix(desc, ".") {
		if u, ok := descUnits[desc[i+2:len(desc)-1]]; ok {
			return u
		}
	}
	return ""
}

// descUnits maps the unit words descriptions end with to UCUM.
var descUnits = map[string]string{"V/V": "V/V", "bits": "bit", "samples": "{sample}", "bytes": "By"}

// allowed renders enum, const, range and pattern constraints in words.
func allowed(s ordered) string {
	if s == nil {
		return ""
	}
	var parts []string
	if c := s.get("const"); c != nil {
		parts = append(parts, "always "+render(c))
	}
	if e, ok := s.get("enum").([]any); ok {
		var vs []string
		for _, v := range e {
			vs = append(vs, render(v))
		}
		parts = append(parts, "one of "+strings.Join(vs, ", "))
	}
	for _, b := range []struct{ key, word string }{
		{"minimum", ">= "}, {"exclusiveMinimum", "> "}, {"maximum", "<= "}, {"exclusiveMaximum", "< "},
		{"minLength", "length >= "},
	} {
		if v := s.get(b.key); v != nil {
			parts = append(parts, b.word+render(v))
		}
	}
	if p, ok := s.get("pattern").(string); ok {
		parts = append(parts, readablePattern(p))
	}
	return strings.Join(parts, "; ")
}

// patternWords says in a reader's words what the schema's regular
// expressions accept; a pattern not listed is quoted as it is.
var patternWords = map[string]string{
	`^[0-9a-f]{64}$`:                  "64 lower-case hex digits",
	`^([0-9a-f]{64})?$`:               "64 lower-case hex digits, or empty",
	`^[0-9]+\.[0-9]+$`:                "major.minor, e.g. 1.1",
	`^[0-9]{4}(-[0-9]{2}-[0-9]{2})?$`: "YYYY-MM-DD, or YYYY",
	`^[0-9]{4}-[0-9]{2}-[0-9]{2}[Tt][0-9]{2}:[0-9]{2}:[0-9]{2}(\.[0-9]+)?([Zz]|[+-][0-9]{2}:[0-9]{2})$`:    "YYYY-MM-DDThh:mm:ssZ (RFC 3339, with a time zone)",
	`^[0-9]{4}-[0-9]{2}-[0-9]{2}([Tt][0-9]{2}:[0-9]{2}:[0-9]{2}(\.[0-9]+)?([Zz]|[+-][0-9]{2}:[0-9]{2}))?$`: "YYYY-MM-DD, or YYYY-MM-DDThh:mm:ssZ (RFC 3339)",
	`^[A-Za-z0-9_-][A-Za-z0-9_.-]*$`:        "letters, digits, _ - and . (not starting with .)",
	`^[0-9]+(\.[0-9]+)?-[0-9]+(\.[0-9]+)?$`: "a band lo-hi, e.g. 170-180 (lo <= value < hi)",
}

func readablePattern(p string) string {
	if w, ok := patternWords[p]; ok {
		return w
	}
	return "matches " + p
}

func render(v any) string {
	switch x := v.(type) {
	case string:
		return strconv.Quote(x)
	case json.Number:
		return x.String()
	case bool:
		return strconv.FormatBool(x)
	}
	return fmt.Sprint(v)
}

func str(v any) string {
	s, _ := v.(string)
	return s
}

func firstNonEmpty(a ...string) string {
	for _, s := range a {
		if s != "" {
			return s
		}
	}
	return ""
}

// WriteDictionaryTSV writes the dictionary as tab-separated values with a
// header line. Tabs and line ends inside values become spaces.
func WriteDictionaryTSV(w io.Writer, d []DictEntry) error {
	var b bytes.Buffer
	b.WriteString("field\ttype\tunit\trequired\tmeaning\tallowed\thdf5\n")
	for _, e := range d {
		fmt.Fprintf(&b, "%s\t%s\t%s\t%t\t%s\t%s\t%s\n", tsvCell(e.Field), tsvCell(e.Type), tsvCell(e.Unit),
			e.Required, tsvCell(e.Meaning), tsvCell(e.Allowed), tsvCell(e.HDF5))
	}
	_, err := w.Write(b.Bytes())
	return err
}

// WriteDictionaryMarkdown writes the dictionary as a Markdown document with
// one table.
func WriteDictionaryMarkdown(w io.Writer, d []DictEntry) error {
	var b bytes.Buffer
	b.WriteString("# Data dictionary\n\n")
	b.WriteString("Every field of a recording's metadata view (the HDF5 attributes and small tables\n")
	b.WriteString("of each file, under the same names; see layout.md). Generated from the JSON Schema\n")
	b.WriteString("by " + schema.Software + ". Units are UCUM (\"1\" = dimensionless, \"/s\" = per second,\n")
	b.WriteString("\"a\" = year); an empty unit means the field is text, a code or a flag.\n")
	b.WriteString("Fields ending in \"[]\" are lists; \".*\" stands for any further field kept as given.\n\n")
	b.WriteString("The HDF5 column says where each field is stored: \"@name\" is an attribute, a column is a\n")
	b.WriteString("1-D dataset of a table group (one row per channel, unit, source or step), and\n")
	b.WriteString("<trial>, <array>, <decomposition> stand for each group's own name.\n\n")
	b.WriteString("| Field | Type | Unit | Required | Meaning | Allowed | HDF5 |\n|---|---|---|---|---|---|---|\n")
	for _, e := range d {
		req := ""
		if e.Required {
			req = "yes"
		}
		fmt.Fprintf(&b, "| `%s` | %s | %s | %s | %s | %s | %s |\n", e.Field, mdCell(e.Type), mdCell(e.Unit), req, mdCell(e.Meaning), mdCell(e.Allowed), mdCell(e.HDF5))
	}
	_, err := w.Write(b.Bytes())
	return err
}

func tsvCell(s string) string {
	return strings.NewReplacer("\t", " ", "\n", " ", "\r", " ").Replace(s)
}

func mdCell(s string) string {
	return strings.NewReplacer("|", "\\|", "\n", " ", "\r", " ").Replace(s)
}

// ordered is a JSON object that keeps its keys' order.
type ordered []kv

type kv struct {
	k string
	v any
}

func (o ordered) get(k string) any {
	for _, e := range o {
		if e.k == k {
			return e.v
		}
	}
	return nil
}

func (o ordered) set(k string, v any) ordered {
	for i, e := range o {
		if e.k == k {
			o[i].v = v
			return o
		}
	}
	return append(o, kv{k, v})
}

// parseOrdered decodes JSON keeping object key order (objects -> ordered,
// arrays -> []any, numbers -> json.Number).
func parseOrdered(data []byte) (any, error) {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.UseNumber()
	v, err := decodeValue(dec)
	if err != nil {
		return nil, err
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("offset %d: data after the top-level value", dec.InputOffset())
	}
	return v, nil
}

func decodeValue(dec *json.Decoder) (any, error) {
	tok, err := dec.Token()
	if err != nil {
		return nil, fmt.Errorf("offset %d: %w", dec.InputOffset(), err)
	}
	switch t := tok.(type) {
	case json.Delim:
		switch t {
		case '{':
			var o ordered
			for dec.More() {
				kt, err := dec.Token()
				if err != nil {
					return nil, fmt.Errorf("offset %d: %w", dec.InputOffset(), err)
				}
				k, _ := kt.(string)
				v, err := decodeValue(dec)
				if err != nil {
					return nil, err
				}
				o = append(o, kv{k, v})
			}
			if _, err := dec.Token(); err != nil {
				return nil, fmt.Errorf("offset %d: %w", dec.InputOffset(), err)
			}
			return o, nil
		case '[':
			var a []any
			for dec.More() {
				v, err := decodeValue(dec)
				if err != nil {
					return nil, err
				}
				a = append(a, v)
			}
			if _, err := dec.Token(); err != nil {
				return nil, fmt.Errorf("offset %d: %w", dec.InputOffset(), err)
			}
			if a == nil {
				a = []any{}
			}
			return a, nil
		}
		return nil, fmt.Errorf("offset %d: unexpected %v", dec.InputOffset(), t)
	default:
		return tok, nil
	}
}

// sortedKeys returns a map's keys in order (used by the tables).
func sortedKeys[V any](m map[string]V) []string {
	ks := make([]string, 0, len(m))
	for k := range m {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	return ks
}
