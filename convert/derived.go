package convert

import (
	"bufio"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"muarc/record"
)

// The figures a program derived from a decomposition (record.Derived, the
// layout's derived/ group) as text of their own, beside the lab's unit
// table and never in it: derived_units_<array>_<decomposition>.csv holds
// one row per unit (label, muarc_id, then the figures) under "key: value"
// lines that say what the figures are and carry the software, the time and
// the method with its parameters; derived_muaps_<array>_<decomposition>.csv
// holds the templates computed from the samples, in the form of the MUAP
// file. Import reads both back into derived/.

// derivedFigure is one float column of a derived unit table.
type derivedFigure struct {
	name, unit string // unit "" = the force unit
	at         func(*record.DerivedUnit) *float64
}

var derivedFigures = []derivedFigure{
	{"recruit_pct_mvc", "%", func(u *record.DerivedUnit) *float64 { return &u.RecruitPctMVC }},
	{"derecruit_pct_mvc", "%", func(u *record.DerivedUnit) *float64 { return &u.DerecruitPctMVC }},
	{"recruit_force", "", func(u *record.DerivedUnit) *float64 { return &u.RecruitForce }},
	{"derecruit_force", "", func(u *record.DerivedUnit) *float64 { return &u.DerecruitForce }},
	{"initial_rate_pps", "/s", func(u *record.DerivedUnit) *float64 { return &u.InitialRatePPS }},
	{"plateau_rate_pps", "/s", func(u *record.DerivedUnit) *float64 { return &u.PlateauRatePPS }},
	{"plateau_isi_cov", "1", func(u *record.DerivedUnit) *float64 { return &u.PlateauISICoV }},
}

const derivedISICount = "plateau_isi_count"

// Preamble keys of a derived unit table.
const (
	derivedKey         = "derived"
	derivedSoftwareKey = "software"
	derivedComputedKey = "computed"
	derivedMethodKey   = "method"
	derivedForceKey    = "force unit"
	derivedWhat        = "figures computed from this decomposition by the software below, not the lab's (muarc import puts them back in derived/, never in the unit table)"
)

// metaText writes s as the value of a "key: value" line: as written when
// it is one line without blanks at its ends and does not start with a
// quote, else as a JSON string (readMetaText undoes it).
func metaText(s string) string {
	if !strings.ContainsAny(s, "\r\n") && strings.TrimSpace(s) == s && !strings.HasPrefix(s, `"`) {
		return s
	}
	b, _ := json.Marshal(s)
	return string(b)
}

func readMetaText(v string) (string, error) {
	if !strings.HasPrefix(v, `"`) {
		return v, nil
	}
	var s string
	err := json.Unmarshal([]byte(v), &s)
	return s, err
}

// writeDerivedUnits writes the derived figures of d as a table.
func writeDerivedUnits(w *bufio.Writer, d *record.Decomposition, delim byte) error {
	dv := d.Derived
	kv := []string{derivedKey, derivedWhat}
	if dv.Software != "" {
		kv = append(kv, derivedSoftwareKey, metaText(dv.Software))
	}
	if !dv.Computed.IsZero() {
		kv = append(kv, derivedComputedKey, dv.Computed.UTC().Format(time.RFC3339Nano))
	}
	method := dv.Method
	if method == "" {
		method = "{}" // as the layout stores it
	}
	kv = append(kv, derivedMethodKey, metaText(method))
	if dv.ForceUnit != "" {
		kv = append(kv, derivedForceKey, metaText(dv.ForceUnit))
	}
	header(w, kv...)
	ds := string(delim)
	w.WriteString("unit" + ds + StoredIDColumn)
	for _, f := range derivedFigures {
		u := f.unit
		if u == "" {
			u = dv.ForceUnit
		}
		w.WriteString(ds + bracket(f.name, u))
	}
	w.WriteString(ds + derivedISICount + "\n")
	var b []byte
	for i := range d.Units {
		name, err := unitCell(&d.Units[i], delim)
		if err != nil {
			return err
		}
		u := &dv.Units[i]
		b = append(b[:0], name...)
		b = append(b, delim)
		b = strconv.AppendInt(b, u.ID, 10)
		for _, f := range derivedFigures {
			b = append(b, delim)
			if v := *f.at(u); !math.IsNaN(v) {
				b = strconv.AppendFloat(b, v, 'g', -1, 64)
			}
		}
		b = append(b, delim)
		b = strconv.AppendInt(b, u.PlateauISIs, 10)
		b = append(b, '\n')
		w.Write(b)
	}
	return nil
}

// derivedUnitsJSON writes the derived figures of d as JSON: what they are,
// the software, time and method (the method as its JSON object), and one
// object per unit.
func derivedUnitsJSON(w *bufio.Writer, d *record.Decomposition) error {
	dv := d.Derived
	out := map[string]any{derivedKey: derivedWhat, "software": dv.Software, "force_unit": dv.ForceUnit}
	if !dv.Computed.IsZero() {
		out["computed"] = dv.Computed.UTC().Format(time.RFC3339Nano)
	}
	if json.Valid([]byte(dv.Method)) {
		out["method"] = json.RawMessage(dv.Method)
	}
	rows := make([]map[string]any, len(d.Units))
	for i := range d.Units {
		u := &dv.Units[i]
		m := map[string]any{"id": u.ID, "label": d.Units[i].Label, derivedISICount: u.PlateauISIs}
		for _, f := range derivedFigures {
			if v := *f.at(u); !math.IsNaN(v) && !math.IsInf(v, 0) {
				m[f.name] = v
			}
		}
		rows[i] = m
	}
	out["units"] = rows
	return writeJSON(w, out)
}

// exportDerived writes the derived figures (and derived templates) of
// every decomposition that has them, through emit.
func exportDerived(rec *record.Recording, format string, delim byte, emit func(rel string, fill func(*bufio.Writer) error) error) error {
	ext := "." + format
	for ti := range rec.Trials {
		t := &rec.Trials[ti]
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			for di := range a.Decompositions {
				d := &a.Decompositions[di]
				if d.Derived == nil {
					continue
				}
				if len(d.Derived.Units) != len(d.Units) {
					return fmt.Errorf("%s/%s/%s: derived figures for %d units, the decomposition has %d", t.Name, a.Name, d.Name, len(d.Derived.Units), len(d.Units))
				}
				rel := t.Name + "/derived_units_" + a.Name + "_" + d.Name + ext
				fill := func(w *bufio.Writer) error { return writeDerivedUnits(w, d, delim) }
				if format == "json" {
					fill = func(w *bufio.Writer) error { return derivedUnitsJSON(w, d) }
				}
				if err := emit(rel, fill); err != nil {
					return err
				}
				if d.Derived.MUAPs == nil {
					continue
				}
				if format == "json" {
					return fmt.Errorf("%s/%s/%s: derived MUAP templates are exported as csv or tsv, not json", t.Name, a.Name, d.Name)
				}
				// The derived templates in the form of the MUAP file.
				dd := *d
				dd.MUAPs = d.Derived.MUAPs
				if err := emit(t.Name+"/derived_muaps_"+a.Name+"_"+d.Name+ext, func(w *bufio.Writer) error {
					w.WriteString(derivedKey + ": MUAP templates computed from the samples by " + orNone(d.Derived.Software) + ", not the lab's (muarc import puts them back in derived/)\n")
					return writeMUAPs(w, a, &dd, delim)
				}); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

// readDerivedUnits reads a table written by writeDerivedUnits for
// decomposition d: every unit once, matched by its label (its id when it
// has none) and checked against muarc_id.
func readDerivedUnits(path string, d *record.Decomposition) (*record.Derived, error) {
	lay, err := readLayout(path, TextOptions{Header: "yes"})
	if err != nil {
		return nil, err
	}
	dv := &record.Derived{}
	isDerived := false
	for _, m := range lay.meta {
		v, err := readMetaText(m.Value)
		if err != nil {
			return nil, perr(path, m.Line, 1, "write the value as it was exported", "%s: %v", m.Key, err)
		}
		switch strings.ToLower(m.Key) {
		case derivedKey:
			isDerived = true
		case derivedSoftwareKey:
			dv.Software = v
		case derivedComputedKey:
			t, err := time.Parse(time.RFC3339Nano, v)
			if err != nil {
				return nil, perr(path, m.Line, 1, "write the time in RFC 3339, e.g. 2026-03-14T09:30:00Z", "computed %q not readable", clip([]byte(v)))
			}
			dv.Computed = t
		case derivedMethodKey:
			if !json.Valid([]byte(v)) {
				return nil, perr(path, m.Line, 1, "the method is a JSON object naming the method and its parameters", "method is not JSON")
			}
			dv.Method = v
		case derivedForceKey:
			dv.ForceUnit = v
		}
	}
	if !isDerived {
		return nil, perr(path, 1, 1, "a derived-figures table starts with the line \"derived: ...\" that muarc export writes", "not a derived-figures table")
	}
	h := lay.header
	want := 2 + len(derivedFigures) + 1
	if len(h) != want || !strings.EqualFold(h[0], "unit") || h[1] != StoredIDColumn || h[want-1] != derivedISICount {
		return nil, perr(path, lay.headerLine, 1, "the header is unit, muarc_id, "+derivedNames()+", "+derivedISICount, "not the columns of a derived-figures table")
	}
	for i, f := range derivedFigures {
		label, _, _ := splitLabelUnit(h[2+i])
		if label != f.name {
			return nil, perr(path, lay.headerLine, 3+i, "the header is unit, muarc_id, "+derivedNames()+", "+derivedISICount, "column %q where %s belongs", h[2+i], f.name)
		}
	}
	row := map[string]int{}
	for i := range d.Units {
		row[unitKey(&d.Units[i])] = i
	}
	rows, err := readRows(lay)
	if err != nil {
		return nil, err
	}
	nan := math.NaN()
	dv.Units = make([]record.DerivedUnit, len(d.Units))
	seen := make([]int, len(d.Units))
	for _, r := range rows {
		if len(r.cells) != want {
			return nil, perr(path, r.line, min(len(r.cells), want)+1, "every row needs as many cells as the header", "row has %d cells, expected %d", len(r.cells), want)
		}
		i, ok := row[string(r.cells[0])]
		if !ok {
			return nil, perr(path, r.line, 1, "give derived figures only for units of the discharge file", "no unit %q in decomposition %s", r.cells[0], d.Name)
		}
		if seen[i] > 0 {
			return nil, perr(path, r.line, 1, "give each unit once", "unit %q again (first on line %d)", r.cells[0], seen[i])
		}
		seen[i] = r.line
		id, err := strconv.ParseInt(string(r.cells[1]), 10, 64)
		if err != nil || id != d.Units[i].ID {
			return nil, perr(path, r.line, 2, "keep the muarc_id that export wrote, and the unit table's muarc_id beside it", "muarc_id %q, unit %q is %d", r.cells[1], r.cells[0], d.Units[i].ID)
		}
		u := record.DerivedUnit{ID: id}
		for k, f := range derivedFigures {
			p := f.at(&u)
			*p = nan
			n, kind := parseNumber(r.cells[2+k], false)
			switch kind {
			case cellText:
				return nil, perr(path, r.line, 3+k, "write a number, or leave the cell empty when not known", "text %q in %s", clip(r.cells[2+k]), f.name)
			case cellNumber:
				*p = n.v
			}
		}
		if u.PlateauISIs, err = strconv.ParseInt(string(r.cells[want-1]), 10, 64); err != nil {
			return nil, perr(path, r.line, want, "write the count of plateau intervals as a whole number", "%s %q", derivedISICount, clip(r.cells[want-1]))
		}
		dv.Units[i] = u
	}
	for i, l := range seen {
		if l == 0 {
			return nil, perr(path, 0, 0, "give a row for every unit of the decomposition", "no derived figures for unit %s", unitKey(&d.Units[i]))
		}
	}
	return dv, nil
}

func derivedNames() string {
	var s []string
	for _, f := range derivedFigures {
		s = append(s, f.name)
	}
	return strings.Join(s, ", ")
}

// derivedUnits reads a derived unit table into its decomposition.
func (pl *Plan) derivedUnits(it input) error {
	a, d, err := pl.decompositionOf(it, "derived figures")
	if err != nil {
		return err
	}
	dv, err := readDerivedUnits(it.path, d)
	if err != nil {
		return err
	}
	if d.Derived != nil {
		dv.MUAPs = d.Derived.MUAPs
	}
	d.Derived = dv
	pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "derived_units", Trial: it.trial, Array: a.Name, Decomposition: d.Name,
		Units: len(dv.Units), Notes: []string{"derived figures (" + orNone(dv.Software) + "), stored in derived/, apart from the lab's unit table"}})
	return nil
}

// derivedMUAPs reads derived MUAP templates into their decomposition; its
// derived unit table must come first.
func (pl *Plan) derivedMUAPs(it input) error {
	a, d, err := pl.decompositionOf(it, "derived MUAP templates")
	if err != nil {
		return err
	}
	if d.Derived == nil {
		return perr(it.path, 0, 0, "give the derived_units file of the same decomposition too", "derived MUAP templates without the derived figures of decomposition %q", d.Name)
	}
	m, err := readMUAPs(it.path, a, d, TextOptions{})
	if err != nil {
		return err
	}
	d.Derived.MUAPs = m
	pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "derived_muaps", Trial: it.trial, Array: a.Name, Decomposition: d.Name,
		Units: m.Units, Channels: m.Channels, Notes: []string{fmt.Sprintf("derived MUAP templates, %d lags from %d samples, stored in derived/", m.Lags, m.FirstLag)}})
	return nil
}

// decompositionOf finds the decomposition with units that a file of what
// belongs to.
func (pl *Plan) decompositionOf(it input, what string) (*record.Array, *record.Decomposition, error) {
	a, err := pl.arrayOf(it)
	if err != nil {
		return nil, nil, err
	}
	for i := range a.Decompositions {
		if a.Decompositions[i].Name == it.dc && len(a.Decompositions[i].Units) > 0 {
			return a, &a.Decompositions[i], nil
		}
	}
	return nil, nil, perr(it.path, 0, 0, "give the decomposition's discharge file too (--discharges)", "no units in decomposition %q of array %q for these %s", it.dc, a.Name, what)
}
