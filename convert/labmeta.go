package convert

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"muarc/schema"
)

// A lab's own flat metadata, mapped onto the layout through the profile's
// lab_metadata section: one small file per recording ("key: value" lines or
// a table with one row) and one subjects table for the whole study (a row
// per subject), both in the lab's own words. The targets are fields of the
// registry (schema.Fields): their kind, unit and allowed values decide what
// a cell may hold. Nothing is guessed: a value the registry does not allow
// and the profile does not map, a unit in a header that is not the field's
// and cannot be converted (or may be, but convert_units is not set), and a
// value two sources give differently are refused with their place.

// ProfileLabMetadata is the profile section that maps a lab's own metadata
// files onto registry fields (PROFILES.md, "A lab's own metadata").
type ProfileLabMetadata struct {
	// File is the per-recording metadata file, relative to the recording
	// folder: "key: value" lines, or a table with a header and one row.
	File string `yaml:"file" json:"file"`
	// Subjects is the study's subjects table (CSV/TSV with a header, one
	// row per subject), relative to SOURCE_DIR (or as given with
	// --subjects).
	Subjects string `yaml:"subjects" json:"subjects"`
	// SubjectKey is the column of the subjects table that holds the
	// subject code; a recording's row is the one whose code equals the
	// recording's subject.id.
	SubjectKey string `yaml:"subject_key" json:"subject_key"`
	// SubjectFrom says where a recording's subject code comes from:
	// "subject.id" (the default: the sidecar or the per-recording file) or
	// "folder" (the first part of the recording folder's path under
	// SOURCE_DIR).
	SubjectFrom string `yaml:"subject_from" json:"subject_from"`
	// Fields maps the lab's column or key names (as written, or without
	// their unit in brackets) to registry paths such as "subject.sex" or
	// "subject.extra.shoe_size".
	Fields map[string]string `yaml:"fields" json:"fields"`
	// Values maps, per registry path, the lab's words to the registry's
	// values ("F": female); a word mapped to "" means "not known".
	Values map[string]map[string]string `yaml:"values" json:"values"`
	// ConvertUnits converts a number whose header states another unit of
	// the same quantity (inches, pounds) to the field's unit; false
	// refuses it.
	ConvertUnits bool `yaml:"convert_units" json:"convert_units"`
}

// plainNumber is a decimal number as labs write it: no infinities, NaN,
// hexadecimal or digit separators (strconv.ParseFloat would take them).
var plainNumber = regexp.MustCompile(`^[+-]?([0-9]+(\.[0-9]*)?|\.[0-9]+)([eE][+-]?[0-9]+)?$`)

// labTarget is one registry field a lab column maps to.
type labTarget struct {
	path  string // as written in the profile
	group string // registry group (study, subject, session)
	name  string // member name in the metadata view
	field schema.Field
	extra bool
}

// labGroups are the registry groups a lab's flat metadata may fill: the
// recording-wide ones (trial and array fields stay in the sidecar or come
// from the files).
var labGroups = []string{"study", "subject", "session"}

func resolveLabTarget(path string) (labTarget, error) {
	if g, name, ok := schema.ExtraGroupOf(path); ok {
		if !contains(labGroups, g) || name == "*" {
			return labTarget{}, fmt.Errorf("%q: extra fields of %s only, one name each", path, strings.Join(labGroups, ", "))
		}
		if _, known := schema.FieldByPath(g + "." + name); known {
			return labTarget{}, fmt.Errorf("%q: %s.%s is a field of the layout; map to it directly", path, g, name)
		}
		return labTarget{path: path, group: g, name: name, extra: true, field: schema.Field{Group: g, Name: name, Kind: schema.KindString}}, nil
	}
	f, ok := schema.FieldByPath(path)
	if !ok || !contains(labGroups, f.Group) {
		return labTarget{}, fmt.Errorf("%q is not a field a lab's metadata can fill; fields: %s, or GROUP.extra.NAME", path, strings.Join(labFieldPaths(), ", "))
	}
	switch f.Kind {
	case schema.KindString, schema.KindNumber, schema.KindInteger, schema.KindDate, schema.KindDateTime, schema.KindTime, schema.KindBoolean:
	default:
		return labTarget{}, fmt.Errorf("%q holds %s, which a table cell cannot give", path, f.Kind)
	}
	return labTarget{path: path, group: f.Group, name: f.Name, field: f}, nil
}

// labFieldPaths lists the registry paths a lab column may map to.
func labFieldPaths() []string {
	var out []string
	for _, g := range labGroups {
		for _, f := range schema.FieldsOf(g) {
			out = append(out, f.Path())
		}
	}
	return out
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// check validates the section as the profile is loaded.
func (m *ProfileLabMetadata) check() error {
	targets := map[string]string{}
	for lab, path := range m.Fields {
		t, err := resolveLabTarget(path)
		if err != nil {
			return fmt.Errorf("lab_metadata: fields: %q: %v", lab, err)
		}
		targets[t.path] = lab
	}
	for path, words := range m.Values {
		t, err := resolveLabTarget(path)
		if err != nil {
			return fmt.Errorf("lab_metadata: values: %v", err)
		}
		for w, v := range words {
			if v == "" || t.field.Enum == nil {
				continue
			}
			if !contains(t.field.Enum, v) {
				return fmt.Errorf("lab_metadata: values: %s: %q -> %q: allowed values are %s (or \"\" for not known)", path, w, v, strings.Join(t.field.Enum, ", "))
			}
		}
	}
	if m.Subjects != "" && m.SubjectKey == "" {
		return fmt.Errorf("lab_metadata: subjects is given without subject_key (the column holding the subject code)")
	}
	if p, ok := m.Fields[m.SubjectKey]; ok && m.SubjectKey != "" && p != "subject.id" {
		return fmt.Errorf("lab_metadata: subject_key %q is mapped to %s; the key column is the subject code, subject.id", m.SubjectKey, p)
	}
	switch m.SubjectFrom {
	case "", "subject.id", "folder":
	default:
		return fmt.Errorf("lab_metadata: subject_from %q: want subject.id or folder", m.SubjectFrom)
	}
	return nil
}

// labCell is one value of a lab's metadata file as written, with its place.
type labCell struct {
	header string // the column header or key as written
	value  string
	line   int
	col    int    // 1-based column (0 for a key: value line)
	text   string // the line as written (for messages)
}

// labValue is a value mapped onto a registry field, with where it came from.
type labValue struct {
	t     labTarget
	v     any // string, float64, int64 or bool; nil = not known
	file  string
	cell  labCell
	notes []string
}

// place names a cell for messages: file:line:column and its header.
func (v labValue) place() string {
	s := fmt.Sprintf("%s:%d", v.file, v.cell.line)
	if v.cell.col > 0 {
		s += fmt.Sprintf(":%d", v.cell.col)
	}
	return s + fmt.Sprintf(" (%q)", v.cell.header)
}

// mapCells maps the cells of one lab file (one recording or one subject)
// onto registry fields. It returns the mapped values and the headers read
// but not mapped.
func (m *ProfileLabMetadata) mapCells(file string, cells []labCell, decimalComma bool) ([]labValue, []string, error) {
	var out []labValue
	var unmapped []string
	for _, c := range cells {
		path, ok := m.Fields[c.header]
		label, unit, _ := splitLabelUnit(c.header)
		if !ok {
			path, ok = m.Fields[label]
		}
		if !ok && c.header == m.SubjectKey && m.SubjectKey != "" {
			path, ok = "subject.id", true
		}
		if !ok {
			unmapped = append(unmapped, c.header)
			continue
		}
		t, err := resolveLabTarget(path)
		if err != nil {
			return nil, nil, perr(file, c.line, c.col, "fix lab_metadata.fields in the profile", "%q: %v", c.header, err)
		}
		lv := labValue{t: t, file: file, cell: c}
		if err := m.convert(&lv, unit, decimalComma); err != nil {
			return nil, nil, err
		}
		out = append(out, lv)
	}
	return out, unmapped, nil
}

// convert turns a cell's text into the target field's value.
func (m *ProfileLabMetadata) convert(lv *labValue, unit string, decimalComma bool) error {
	c, t := lv.cell, lv.t
	fail := func(hint, format string, args ...any) error {
		e := perr(lv.file, c.line, c.col, hint, format, args...)
		e.Example = c.text
		return e
	}
	raw := strings.TrimSpace(c.value)
	if words, ok := m.Values[t.path]; ok {
		if v, ok := words[raw]; ok {
			if v == "" {
				lv.notes = append(lv.notes, fmt.Sprintf("%q read as not known (lab_metadata.values.%s)", raw, t.path))
				return nil
			}
			lv.notes = append(lv.notes, fmt.Sprintf("%q read as %q (lab_metadata.values.%s)", raw, v, t.path))
			raw = v
		}
	}
	if raw == "" {
		return nil // not known
	}
	hintValues := func() string {
		return fmt.Sprintf("correct the cell, or map the word in the profile: lab_metadata.values.%s: {%q: <one of %s>}", t.path, raw, strings.Join(t.field.Enum, ", "))
	}
	if t.field.Kind != schema.KindNumber && t.field.Kind != schema.KindInteger && unit != "" && !t.extra {
		return fail("write the header without a unit, or map the column to a number field", "column %q states a unit (%s), but %s is not a number", c.header, unit, t.path)
	}
	switch t.field.Kind {
	case schema.KindString:
		if t.field.Enum != nil && !contains(t.field.Enum, raw) {
			return fail(hintValues(), "%q is not a value of %s (column %q); allowed values: %s%s", raw, t.path, c.header, strings.Join(t.field.Enum, ", "), mappedWords(m.Values[t.path]))
		}
		if t.extra && unit != "" {
			lv.notes = append(lv.notes, fmt.Sprintf("stored as text, its unit %s with it in the name %q", unit, t.name))
		}
		lv.v = raw
	case schema.KindNumber, schema.KindInteger:
		s := raw
		if decimalComma {
			s = strings.Replace(s, ",", ".", 1)
		}
		f, err := strconv.ParseFloat(s, 64)
		if err != nil || !plainNumber.MatchString(s) || math.IsInf(f, 0) {
			return fail("write a plain finite number (a decimal point, or a decimal comma throughout a ;- or tab-separated table); leave the cell empty when it is not known", "%q is not a number (column %q, field %s)", raw, c.header, t.path)
		}
		want := t.field.Unit
		conv, err := m.unitFactor(unit, want)
		if err != nil {
			return fail(err.Error(), "column %q: %v", c.header, errUnit(unit, want))
		}
		if conv != 1 {
			lv.notes = append(lv.notes, fmt.Sprintf("%s %s converted to %s (x %g, lab_metadata.convert_units)", raw, unit, want, conv))
			f *= conv
		}
		if num := strconv.FormatFloat(f, 'g', -1, 64); t.field.Enum != nil && !contains(t.field.Enum, num) {
			return fail(hintValues(), "%s is not a value of %s (column %q); allowed values: %s", num, t.path, c.header, strings.Join(t.field.Enum, ", "))
		}
		if t.field.Kind == schema.KindInteger {
			if f != math.Trunc(f) || math.Abs(f) > 1<<53 {
				return fail("write a whole number", "%q is not a whole number (column %q, field %s)", raw, c.header, t.path)
			}
			lv.v = int64(f)
		} else {
			lv.v = f
		}
	case schema.KindDate:
		if _, err := time.Parse("2006-01-02", raw); err != nil {
			return fail("write the date as YYYY-MM-DD, e.g. 2026-03-14 (muarc does not guess day and month order)", "%q is not a date YYYY-MM-DD (column %q, field %s)", raw, c.header, t.path)
		}
		lv.v = raw
	case schema.KindDateTime, schema.KindTime:
		_, e1 := time.Parse(time.RFC3339, raw)
		_, e2 := time.Parse("2006-01-02", raw)
		if e1 != nil && (e2 != nil || t.field.Kind == schema.KindTime) {
			return fail("write YYYY-MM-DD or an RFC 3339 time such as 2026-03-14T09:30:00Z (muarc does not guess day and month order)", "%q is not a date or RFC 3339 time (column %q, field %s)", raw, c.header, t.path)
		}
		lv.v = raw
	case schema.KindBoolean:
		switch raw {
		case "true":
			lv.v = true
		case "false":
			lv.v = false
		default:
			return fail(hintValues(), "%q is not true or false (column %q, field %s)", raw, c.header, t.path)
		}
	}
	return nil
}

func mappedWords(words map[string]string) string {
	if len(words) == 0 {
		return ""
	}
	var ks []string
	for k := range words {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	for i, k := range ks {
		ks[i] = fmt.Sprintf("%q -> %q", k, words[k])
	}
	return "; the profile maps " + strings.Join(ks, ", ")
}

// unitConversions are the header units muarc converts to a field's unit,
// with their exact factors: the international inch is 2.54 cm and the
// avoirdupois pound 0.45359237 kg by definition (international yard and
// pound agreement, 1959; UCUM [in_i], [ft_i], [lb_av]). Spellings are the
// UCUM codes and the words labs write.
var unitConversions = map[string]map[string]float64{
	"cm": {"cm": 1, "mm": 0.1, "m": 100, "[in_i]": 2.54, "in": 2.54, "inch": 2.54, "inches": 2.54, "[ft_i]": 30.48, "ft": 30.48},
	"kg": {"kg": 1, "g": 0.001, "[lb_av]": 0.45359237, "lb": 0.45359237, "lbs": 0.45359237},
	"a":  {"a": 1, "y": 1, "yr": 1, "yrs": 1, "year": 1, "years": 1},
}

func errUnit(unit, want string) string {
	if _, ok := unitConversions[want][unit]; ok {
		return fmt.Sprintf("the header states %s, the field holds %s", unit, want)
	}
	if want == "" {
		return fmt.Sprintf("the header states %s, the field has no unit", unit)
	}
	return fmt.Sprintf("the header states %q, which muarc cannot convert to %s", unit, want)
}

// unitFactor gives the factor that turns a value in the header's unit into
// the field's unit: 1 when the header states none or the same unit. A unit
// of the same quantity converts only with convert_units; anything else is
// refused (the error is the hint).
func (m *ProfileLabMetadata) unitFactor(unit, want string) (float64, error) {
	if unit == "" {
		return 1, nil
	}
	if nu, err := NormalizeUnit(unit); err == nil && nu == want {
		return 1, nil
	}
	f, ok := unitConversions[want][unit]
	if !ok {
		f, ok = unitConversions[want][strings.ToLower(unit)]
	}
	switch {
	case ok && f == 1:
		return 1, nil
	case ok && m.ConvertUnits:
		return f, nil
	case ok:
		return 0, fmt.Errorf("set lab_metadata.convert_units: true in the profile to convert %s to %s, or write the values in %s", unit, want, want)
	case want == "":
		return 0, fmt.Errorf("write the header without a unit")
	}
	return 0, fmt.Errorf("write the values in %s and the header as LABEL (%s)", want, want)
}

// readLabFile reads a per-recording metadata file: "key: value" lines, or
// a table with a header and one row (both may be in one file, the lines
// first).
func readLabFile(path string) ([]labCell, bool, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, false, err
	}
	if len(data) > 1<<20 {
		return nil, false, perr(path, 0, 0, "a recording's metadata file is a few lines", "larger than 1 MiB")
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	var cells []labCell
	table := false
	for i, raw := range bytes.Split(data, []byte("\n")) {
		t := trimBlank(raw)
		if len(t) == 0 || isComment(t) {
			continue
		}
		k, v, ok := metaLine(t)
		if !ok {
			table = true
			break
		}
		cells = append(cells, labCell{header: k, value: v, line: i + 1, text: string(t)})
	}
	if !table {
		if len(cells) == 0 {
			return nil, false, perr(path, 1, 0, "write one \"key: value\" line per field, or a header line and one row", "no metadata in the file")
		}
		return cells, false, nil
	}
	lay, err := readLayout(path, TextOptions{Header: "yes"})
	if err != nil {
		return nil, false, err
	}
	rows, err := readRows(lay)
	if err != nil {
		return nil, false, err
	}
	if len(rows) != 1 {
		line := lay.headerLine
		if len(rows) > 1 {
			line = rows[1].line
		}
		return nil, false, perr(path, line, 0, "a recording's metadata file holds one row; the study's subjects go in lab_metadata.subjects", "%d rows under the header", len(rows))
	}
	for _, m := range lay.meta {
		cells = append(cells, labCell{header: m.Key, value: m.Value, line: m.Line, text: m.Key + ": " + m.Value})
	}
	tc, err := tableCells(lay, rows[0])
	return append(cells, tc...), lay.dialect.DecimalComma, err
}

func tableCells(lay *layout, r textRow) ([]labCell, error) {
	if len(r.cells) != len(lay.header) {
		return nil, perr(lay.file, r.line, 0, "give every row as many cells as the header", "%d cells under a header of %d", len(r.cells), len(lay.header))
	}
	text := rowText(r, lay.dialect.Delimiter)
	out := make([]labCell, len(r.cells))
	for i, c := range r.cells {
		out[i] = labCell{header: strings.TrimSpace(lay.header[i]), value: string(c), line: r.line, col: i + 1, text: text}
	}
	return out, nil
}

func rowText(r textRow, d byte) string {
	parts := make([]string, len(r.cells))
	for i, c := range r.cells {
		parts[i] = string(c)
		if i < len(r.quoted) && r.quoted[i] {
			parts[i] = strconv.Quote(string(c))
		}
	}
	sep := string(d)
	if d == ' ' {
		sep = " "
	}
	return strings.Join(parts, sep)
}
