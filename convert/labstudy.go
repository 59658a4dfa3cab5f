package convert

import (
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"
)

// SubjectTable is a study's subjects table read and mapped once: each
// subject's row, keyed by its code, as registry values.
type SubjectTable struct {
	File string
	// rows maps a subject code to the row's mapped values.
	rows map[string][]labValue
	line map[string]int
	// Unmapped lists the columns read and not stored.
	Unmapped []string
	why      string
}

// Subjects gives the number of subject rows.
func (st *SubjectTable) Subjects() int { return len(st.rows) }

// ReadSubjectTable reads a subjects table (a header, one row per subject)
// and maps every row through the profile's lab_metadata section, so that a
// bad cell is refused once, whichever recording needs its row.
func ReadSubjectTable(path string, prof *Profile) (*SubjectTable, error) {
	m := &prof.LabMetadata
	if m.SubjectKey == "" {
		return nil, perr(path, 0, 0, "name the column of subject codes in the profile: lab_metadata.subject_key", "no subject_key given for the subjects table")
	}
	lay, err := readLayout(path, TextOptions{Header: "yes"})
	if err != nil {
		return nil, err
	}
	key := -1
	for i, h := range lay.header {
		if strings.TrimSpace(h) == m.SubjectKey {
			key = i
		}
	}
	if key < 0 {
		return nil, perr(path, lay.headerLine, 0, fmt.Sprintf("set lab_metadata.subject_key to one of the columns: %s", strings.Join(quoteAll(lay.header), ", ")), "no column %q (lab_metadata.subject_key) in the header", m.SubjectKey)
	}
	rows, err := readRows(lay)
	if err != nil {
		return nil, err
	}
	st := &SubjectTable{File: path, rows: map[string][]labValue{}, line: map[string]int{}, why: lay.dialect.Why}
	unmapped := map[string]bool{}
	for _, r := range rows {
		cells, err := tableCells(lay, r)
		if err != nil {
			return nil, err
		}
		code := strings.TrimSpace(cells[key].value)
		if code == "" {
			e := perr(path, r.line, key+1, "give every row its subject code", "no subject code in column %q", m.SubjectKey)
			e.Example = cells[key].text
			return nil, e
		}
		if l, dup := st.line[code]; dup {
			e := perr(path, r.line, key+1, "give each subject one row", "subject %q has a second row (the first is on line %d)", code, l)
			e.Example = cells[key].text
			return nil, e
		}
		vals, un, err := m.mapCells(path, cells, lay.dialect.DecimalComma)
		if err != nil {
			return nil, err
		}
		for _, u := range un {
			unmapped[u] = true
		}
		st.rows[code], st.line[code] = vals, r.line
	}
	for u := range unmapped {
		st.Unmapped = append(st.Unmapped, u)
	}
	sort.Strings(st.Unmapped)
	return st, nil
}

// labMetadata reads the lab's own metadata of one recording (its file and
// its subject's row) and merges it into the sidecar's view (nil when there
// is no sidecar). A value given twice differently is refused with both
// places.
func (pl *Plan) labMetadata(in Inputs, prof *Profile, sc *Sidecar, rel func(string) string) (map[string]any, error) {
	m := &prof.LabMetadata
	var vals []labValue
	if in.LabMeta != "" {
		cells, dc, err := readLabFile(in.LabMeta)
		if err != nil {
			return nil, err
		}
		v, unmapped, err := m.mapCells(in.LabMeta, cells, dc)
		if err != nil {
			return nil, err
		}
		vals = v
		pl.Report.Files = append(pl.Report.Files, FileReport{Name: rel(in.LabMeta), Role: "lab metadata", Notes: labNotes(v, unmapped)})
	}
	st := in.subjects
	if st == nil && in.Subjects != "" {
		t, err := ReadSubjectTable(in.Subjects, prof)
		if err != nil {
			return nil, err
		}
		st = t
	}
	if st != nil {
		code, from := "", ""
		if m.SubjectFrom == "folder" {
			code, from = in.SubjectFolder, "the recording folder"
			if code == "" {
				code = filepath.Base(filepath.Clean(in.Dir))
			}
		} else {
			for _, v := range vals {
				if v.t.path == "subject.id" && v.v != nil {
					code, from = v.v.(string), v.place()
				}
			}
			if code == "" && sc != nil {
				if s, ok := sc.View["subject"].(map[string]any); ok {
					code, _ = s["id"].(string)
					from = sc.File
				}
			}
		}
		if code == "" {
			return nil, perr(in.Dir, 0, 0, "map the lab's subject code to subject.id in lab_metadata.fields (or give it in the sidecar), or set lab_metadata.subject_from: folder", "cannot tell which row of %s is this recording's subject", st.File)
		}
		row, ok := st.rows[code]
		if !ok {
			return nil, perr(st.File, 0, 0, fmt.Sprintf("add a row for %q, or correct the code in %s", code, from), "no row for subject %q (column %q), the subject of %s", code, m.SubjectKey, from)
		}
		vals = append(vals, row...)
		notes := []string{fmt.Sprintf("the row of subject %q (line %d), the subject of %s; %s", code, st.line[code], from, st.why)}
		pl.Report.Files = append(pl.Report.Files, FileReport{Name: rel(st.File), Role: "subjects", Notes: append(notes, labNotes(row, st.Unmapped)...)})
		pl.extraSources = append(pl.extraSources, input{path: st.File, rel: rel(st.File), role: "subjects"})
	}
	if len(vals) == 0 {
		if sc == nil {
			return nil, nil
		}
		return sc.View, nil
	}
	view := map[string]any{}
	if sc != nil {
		view = sc.View
	}
	first := map[string]labValue{}
	for _, v := range vals {
		if v.v == nil {
			continue
		}
		if f, seen := first[v.t.path]; seen {
			if !sameValue(f.v, v.v) {
				return nil, perr(v.file, v.cell.line, v.cell.col, "correct one of them, or leave one out (muarc does not pick)", "%s is %v here but %v in %s", v.t.path, v.v, f.v, f.place())
			}
			continue
		}
		first[v.t.path] = v
		g, _ := view[v.t.group].(map[string]any)
		if g == nil {
			g = map[string]any{}
			view[v.t.group] = g
		}
		if old, ok := g[v.t.name]; ok && old != nil && !sameValue(old, v.v) {
			line, col := sc.Where("/" + v.t.group + "/" + v.t.name)
			e := perr(v.file, v.cell.line, v.cell.col, "correct one of them, or leave the member out of the sidecar (muarc does not pick)", "%s is %v here but %v in the sidecar %s:%d:%d", v.t.path, v.v, old, sc.File, line, col)
			e.Example = v.cell.text
			return nil, e
		}
		g[v.t.name] = v.v
	}
	return view, nil
}

// sameValue compares a sidecar's value (JSON or YAML numbers as float64 or
// int64) with a mapped one.
func sameValue(a, b any) bool {
	fa, oka := asFloat(a)
	fb, okb := asFloat(b)
	if oka && okb {
		return fa == fb
	}
	return a == b
}

func asFloat(v any) (float64, bool) {
	switch x := v.(type) {
	case float64:
		return x, !math.IsNaN(x)
	case int64:
		return float64(x), true
	case int:
		return float64(x), true
	}
	return 0, false
}

func labNotes(vals []labValue, unmapped []string) []string {
	var mapped, notes []string
	for _, v := range vals {
		mapped = append(mapped, fmt.Sprintf("%q -> %s", v.cell.header, v.t.path))
		for _, n := range v.notes {
			notes = append(notes, fmt.Sprintf("%s (line %d): %s", v.cell.header, v.cell.line, n))
		}
	}
	out := []string{}
	if len(mapped) > 0 {
		out = append(out, "mapped: "+strings.Join(mapped, ", "))
	}
	out = append(out, notes...)
	if len(unmapped) > 0 {
		out = append(out, "read and not stored (no lab_metadata.fields entry): "+strings.Join(quoteAll(unmapped), ", "))
	}
	return out
}
