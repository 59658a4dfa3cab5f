package convert

import (
	"errors"
	"fmt"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"muarc/record"
)

// Reading the discharge and unit-table files of a recording into its
// decompositions (first pass; the force and EMG files are in
// import_signals.go).

func (pl *Plan) arrayOf(it input) (*record.Array, error) {
	for ti := range pl.Rec.Trials {
		t := &pl.Rec.Trials[ti]
		if t.Name != it.trial {
			continue
		}
		for ai := range t.Arrays {
			if t.Arrays[ai].Name == it.array && t.Arrays[ai].Samples != nil {
				return &t.Arrays[ai], nil
			}
		}
	}
	return nil, perr(it.path, 0, 0, "give the EMG file of the array too (--emg)", "no EMG for trial %q array %q", it.trial, it.array)
}

func (pl *Plan) discharges(it input, prof *Profile) error {
	a, err := pl.arrayOf(it)
	if err != nil {
		return err
	}
	rows, _ := a.Samples.Shape()
	dc, err := ReadDischarges(it.path, Grid{RateHz: a.SamplingRateHz, StartS: a.StartS, Samples: rows}, prof.dischargeOptions())
	if err != nil {
		line, ok := onlyLineWithoutNumber(it.path)
		if !ok {
			return err
		}
		if sh := prof.Discharges.Shape; sh != ShapeLong && sh != ShapeLines && !exportedEmptyHeader(line) {
			// Read as a header of unit columns, the line names units that
			// never discharged; read as a long table's header, it names
			// none: the two store different recordings.
			var pe *ParseError
			if errors.As(err, &pe) {
				pe.Msg = fmt.Sprintf("the file holds one line and no number (%q): read as the header of a long table (unit, time) it means no units; read as one column per unit it names units that never discharged", line)
				pe.Hint = "give --shape long (profile: discharges.shape: long) for no units, with the decomposition's unit table holding no rows; or give each unit's discharges"
			}
			return err
		}
		// No reading can take a discharge time from a file without a
		// number; whether it means no units or units without discharges
		// is the unit table's to say (emptyDischarges).
		if pl.noTimes == nil {
			pl.noTimes = map[[3]string]error{}
		}
		pl.noTimes[[3]string{it.trial, a.Name, it.dc}] = err
		decompNamed(a, it.dc)
		pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "discharges", Trial: it.trial, Array: a.Name, Decomposition: it.dc,
			Notes: []string{"the file holds no number (a header line only): no discharges"}})
		return nil
	}
	d := decompNamed(a, it.dc)
	byLabel := map[string]int{}
	for i, u := range d.Units {
		if u.Label != "" {
			byLabel[u.Label] = i
		}
	}
	count := 0
	for _, tr := range dc.Units {
		if i, ok := byLabel[tr.Label]; ok && tr.Label != "" {
			d.Units[i].Discharges = tr.Discharges
		} else {
			u := record.NewUnit(nextUnitID(d))
			u.Label = tr.Label
			u.Discharges = tr.Discharges
			d.Units = append(d.Units, u)
		}
		count += len(tr.Discharges)
	}
	pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "discharges", Trial: it.trial, Array: a.Name, Decomposition: d.Name,
		Units: len(dc.Units), Discharges: count, Notes: dc.Notes})
	return nil
}

func (pl *Plan) units(it input, prof *Profile) error {
	a, err := pl.arrayOf(it)
	if err != nil {
		return err
	}
	// Unit tables have their own dialect (units.delimiter, units.decimal_comma);
	// the signal files' settings do not apply to them.
	d, _ := ParseDelimiter(prof.Units.Delimiter)
	ut, err := ReadUnitTable(it.path, UnitTableOptions{TextOptions: TextOptions{Delimiter: d, DecimalComma: prof.Units.DecimalComma}, Columns: prof.Units.Columns, AllowOutOfRange: prof.allowOutOfRange()})
	if err != nil {
		return err
	}
	dec := decompNamed(a, it.dc)
	if pl.unitTables == nil {
		pl.unitTables = map[[3]string]int{}
	}
	pl.unitTables[[3]string{it.trial, a.Name, it.dc}] = len(ut.Units)
	notes := append([]string(nil), ut.Notes...)
	// Units are matched by label as written. A discharge file without
	// labels numbered its units 1..N: then a table label that is exactly
	// such a number names that unit.
	idx := map[string]int{}
	unlabelled := len(dec.Units) > 0
	for i, u := range dec.Units {
		if u.Label != "" {
			idx[u.Label] = i
			unlabelled = false
		}
	}
	if unlabelled {
		for i, u := range dec.Units {
			idx[strconv.FormatInt(u.ID, 10)] = i
		}
		notes = append(notes, fmt.Sprintf("the discharge file has no unit labels: the table's units were matched to units 1..%d in the discharge file's order by their number", len(dec.Units)))
	}
	if len(idx) > 0 && len(ut.Units) > 0 {
		matched := false
		for _, u := range ut.Units {
			_, ok := idx[u.Label]
			matched = matched || ok
		}
		if !matched {
			var have []string
			for _, u := range dec.Units {
				have = append(have, u.Name())
				if len(have) == 5 {
					break
				}
			}
			return perr(it.path, 0, 0, "write each unit's label the same way in both files (muarc matches labels as written, never by the digits in them)",
				"no unit of the table (first %q) is among the discharge file's units (%s)", ut.Units[0].Label, strings.Join(have, ", "))
		}
	}
	rowOf := map[int64]int{}
	for r, u := range ut.Units {
		if i, ok := idx[u.Label]; ok {
			u.ID = dec.Units[i].ID
			u.Discharges = dec.Units[i].Discharges
			dec.Units[i] = u
		} else {
			u.ID = nextUnitID(dec)
			idx[u.Label] = len(dec.Units)
			dec.Units = append(dec.Units, u)
			notes = append(notes, fmt.Sprintf("unit %q has figures but no discharges", u.Label))
		}
		rowOf[u.ID] = r
	}
	if ut.StoredIDs != nil {
		// The ids an export wrote (muarc_id) come back.
		rowOf = map[int64]int{}
		for r, u := range ut.Units {
			dec.Units[idx[u.Label]].ID = ut.StoredIDs[r]
			rowOf[ut.StoredIDs[r]] = r
		}
		seen := map[int64]string{}
		for _, u := range dec.Units {
			if l, dup := seen[u.ID]; dup {
				return perr(it.path, 0, 0, "give every unit of the decomposition its own muarc_id, or drop the column", "muarc_id %d names units %q and %q", u.ID, l, u.Name())
			}
			seen[u.ID] = u.Name()
		}
		notes = append(notes, "unit ids from the muarc_id column")
	}
	// Extra columns in the decomposition's unit order.
	for _, c := range ut.Extra {
		col := record.Column{Name: c.Name, Unit: c.Unit}
		for _, u := range dec.Units {
			r, ok := rowOf[u.ID]
			if c.Values != nil {
				v := math.NaN()
				if ok {
					v = c.Values[r]
				}
				col.Values = append(col.Values, v)
			} else {
				s := ""
				if ok {
					s = c.Text[r]
				}
				col.Text = append(col.Text, s)
			}
		}
		dec.ExtraColumns = append(dec.ExtraColumns, col)
	}
	pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "units", Trial: it.trial, Array: a.Name, Decomposition: dec.Name,
		Units: len(ut.Units), Notes: notes})
	return nil
}

// nextUnitID is the id for a unit added to d: one more than the largest.
func nextUnitID(d *record.Decomposition) int64 {
	var m int64
	for _, u := range d.Units {
		m = max(m, u.ID)
	}
	return m + 1
}

// onlyLineWithoutNumber returns the one non-blank line of the text file at
// path when it holds no token (split at spaces, commas, semicolons and
// tabs) that reads as a number: then no reading of it yields a discharge
// time.
func onlyLineWithoutNumber(path string) (string, bool) {
	b, err := os.ReadFile(path)
	if err != nil || len(b) > 1<<16 {
		return "", false
	}
	var lines []string
	for _, l := range strings.Split(strings.TrimPrefix(string(b), "\ufeff"), "\n") {
		if l = strings.TrimSpace(l); l != "" {
			lines = append(lines, l)
		}
	}
	if len(lines) != 1 {
		return "", false
	}
	for _, tok := range strings.FieldsFunc(lines[0], func(r rune) bool {
		return r == ',' || r == ';' || r == '\t' || r == ' '
	}) {
		t := strings.Trim(tok, "\"'()[]")
		if _, err := strconv.ParseFloat(strings.Replace(t, ",", ".", 1), 64); err == nil {
			return "", false
		}
	}
	return lines[0], true
}

// exportedEmptyHeader reports whether line is exactly the header `muarc
// export` writes over a long table or one line per unit ("unit", then the
// time column's head, in any of the delimiters it writes): the first column
// holds unit labels, so a file of that line alone names no unit.
func exportedEmptyHeader(line string) bool {
	for _, d := range []string{",", ";", "\t"} {
		for _, tb := range []dischargeTime{{seconds: true}, {}} {
			if line == "unit"+d+tb.head() {
				return true
			}
		}
	}
	return false
}

// emptyDischarges decides the discharge files without a number: with the
// decomposition's unit table read and empty (a header only) the
// decomposition is stored with no units, as an export of one writes it;
// otherwise the file is refused (the reader's refusal, with what to give),
// since zero units and units that never discharged store different values.
func (pl *Plan) emptyDischarges() error {
	keys := make([][3]string, 0, len(pl.noTimes))
	for k := range pl.noTimes {
		keys = append(keys, k)
	}
	slices.SortFunc(keys, func(a, b [3]string) int {
		return strings.Compare(a[0]+"\x00"+a[1]+"\x00"+a[2], b[0]+"\x00"+b[1]+"\x00"+b[2])
	})
	for _, k := range keys {
		err := pl.noTimes[k]
		if pl.readEmpty(k[0], k[1], k[2]) {
			continue
		}
		rows, read := pl.unitTables[k]
		var pe *ParseError
		if errors.As(err, &pe) {
			why := "give the decomposition's unit table too (--units): one row per unit, a header line only for a decomposition that found none"
			if read {
				why = fmt.Sprintf("the unit table lists %d unit(s) but the discharge file holds no discharge time: give each unit's discharges, or one row per unit it lists", rows)
			}
			pe.Hint = why + "; " + pe.Hint
		}
		return err
	}
	return nil
}

// readEmpty reports whether trial/array/decomposition was read from files
// that say it found no units (emptyDischarges kept it).
func (pl *Plan) readEmpty(trial, array, dc string) bool {
	k := [3]string{trial, array, dc}
	_, none := pl.noTimes[k]
	rows, read := pl.unitTables[k]
	return none && read && rows == 0
}
