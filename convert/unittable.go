package convert

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"muarc/internal/fieldbind"
	"muarc/record"
	"muarc/schema"
)

// Layout fields of a unit table (the dataset names under units/): names of
// the registry's unit group (schema.Fields), spelled here for the header
// spellings below; unittable_test.go checks each against the registry.
const (
	FieldID          = "id"
	FieldSilhouette  = "silhouette"
	FieldPNR         = "pnr_db"
	FieldAccuracy    = "accuracy_pct"
	FieldISICoV      = "isi_cov"
	FieldRecruit     = "recruit_pct_mvc"
	FieldDerecruit   = "derecruit_pct_mvc"
	FieldInitialRate = "initial_rate_pps"
	FieldMeanRate    = "mean_rate_pps"
)

// StoredIDColumn is the unit-table column in which muarc export writes
// muarc's own unit ids beside the labels, so that an import of the export
// gives the units their ids back.
const StoredIDColumn = "muarc_id"

// unitSpellings maps common header spellings (lower case, without blanks,
// '_', '-' and '.') to layout fields. Common practice in decomposition
// exports; the profile adds more.
var fieldSpellings = map[string]string{
	"unit": FieldID, "unitid": FieldID, "id": FieldID, "mu": FieldID, "muid": FieldID, "motorunit": FieldID,
	"motorunitid": FieldID, "unitnumber": FieldID, "munumber": FieldID, "mu#": FieldID, "unit#": FieldID,
	"sil": FieldSilhouette, "silhouette": FieldSilhouette,
	"pnr": FieldPNR, "pnrdb": FieldPNR, "pulsetonoiseratio": FieldPNR,
	"accuracy": FieldAccuracy, "accuracypct": FieldAccuracy, "acc": FieldAccuracy,
	"covisi": FieldISICoV, "isicov": FieldISICoV, "cvisi": FieldISICoV, "isicv": FieldISICoV, "cov": FieldISICoV,
	"coefficientofvariationisi": FieldISICoV,
	"recruitment":               FieldRecruit, "recruitmentthreshold": FieldRecruit, "recruit": FieldRecruit, "rt": FieldRecruit,
	"recruitpctmvc": FieldRecruit, "recruitmentpctmvc": FieldRecruit,
	"derecruitment": FieldDerecruit, "derecruitmentthreshold": FieldDerecruit, "derecruit": FieldDerecruit,
	"dert": FieldDerecruit, "drt": FieldDerecruit, "derecruitpctmvc": FieldDerecruit,
	"initialrate": FieldInitialRate, "initialdischargerate": FieldInitialRate, "idr": FieldInitialRate,
	"initialratepps": FieldInitialRate, "initialfiringrate": FieldInitialRate,
	"meanrate": FieldMeanRate, "meandischargerate": FieldMeanRate, "mdr": FieldMeanRate, "meanratepps": FieldMeanRate,
	"meanfiringrate": FieldMeanRate, "averagedischargerate": FieldMeanRate,
}

// fieldUnits lists the units a header may carry for each field (UCUM, ""
// for none written).
var fieldUnits = map[string][]string{
	FieldID: {""}, FieldSilhouette: {"", "1"}, FieldPNR: {"", "dB"}, FieldAccuracy: {"", "%"},
	FieldISICoV: {"", "1"}, FieldRecruit: {"", "%"}, FieldDerecruit: {"", "%"},
	FieldInitialRate: {"", "/s", "Hz"}, FieldMeanRate: {"", "/s", "Hz"},
}

func spellKey(l string) string {
	var b strings.Builder
	for _, r := range strings.ToLower(l) {
		switch r {
		case ' ', '_', '-', '.', '\t':
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// UnitTableOptions control reading a unit table.
type UnitTableOptions struct {
	TextOptions
	// Columns maps header labels (as written, without the unit) to layout
	// fields; it comes first, before the built-in spellings.
	Columns map[string]string
	// AllowOutOfRange stores infinity words and numbers beyond float64 as
	// ±Inf (underflow as 0) instead of refusing the cell.
	AllowOutOfRange bool
}

// UnitTable is a unit table read into units and extra columns.
type UnitTable struct {
	File  string
	Units []record.Unit
	// StoredIDs are the unit ids of a muarc_id column (one per row), nil
	// when the table has none.
	StoredIDs []int64
	Extra     []record.Column
	// Mapped says which header went to which field.
	Mapped map[string]string
	Notes  []string
}

// ReadUnitTable reads a delimited unit table with a header.
func ReadUnitTable(path string, opt UnitTableOptions) (*UnitTable, error) {
	if opt.Header == "" {
		opt.Header = "yes"
	}
	lay, err := readLayout(path, opt.TextOptions)
	if err != nil {
		return nil, err
	}
	rows, err := readRows(lay)
	if err != nil {
		return nil, err
	}
	ut := &UnitTable{File: path, Mapped: map[string]string{}}
	ut.Notes = append(ut.Notes, lay.dialect.Why)
	fields := make([]string, len(lay.header))
	units := make([]string, len(lay.header))
	idCol := -1
	used := map[string]int{}
	storedCol := -1
	for i, h := range lay.header {
		l, u, _ := splitLabelUnit(h)
		if l == StoredIDColumn {
			// muarc's own unit ids, written by export (not a lab's column).
			fields[i], storedCol = StoredIDColumn, i
			continue
		}
		nu, err := NormalizeUnit(u)
		if err != nil {
			return nil, perr(path, lay.headerLine, i+1, "write the unit in UCUM in brackets after the label", "%v", err)
		}
		units[i] = nu
		f, ok := opt.Columns[l]
		if !ok {
			f = fieldSpellings[spellKey(l)]
		}
		if f != "" {
			if _, known := fieldUnits[f]; !known {
				return nil, perr(path, lay.headerLine, i+1, "map columns to id, silhouette, pnr_db, accuracy_pct, isi_cov, recruit_pct_mvc, derecruit_pct_mvc, initial_rate_pps or mean_rate_pps", "profile maps %q to unknown field %q", l, f)
			}
			okUnit := false
			for _, fu := range fieldUnits[f] {
				okUnit = okUnit || fu == nu || (u == "%MVC" || u == "% MVC") && fu == "%"
			}
			if !okUnit {
				ut.Notes = append(ut.Notes, fmt.Sprintf("column %q looks like %s but its unit %q is not that field's; kept as an extra column", h, f, u))
				f = ""
			}
		}
		if f != "" {
			if j, dup := used[f]; dup {
				return nil, perr(path, lay.headerLine, i+1, "keep one column per field, or map one of them to another name in the profile", "columns %q and %q both map to %s", lay.header[j], h, f)
			}
			used[f] = i
			ut.Mapped[h] = f
		}
		fields[i] = f
		if f == FieldID {
			idCol = i
		}
	}
	if idCol < 0 {
		return nil, perr(path, lay.headerLine, 0, "name the unit id column \"unit\" (or map it in the profile)", "no unit id column")
	}
	seen := map[string]int{}
	var extraVals [][]float64
	var extraText [][]string
	extraIdx := []int{}
	for i, f := range fields {
		if f == "" {
			extraIdx = append(extraIdx, i)
		}
	}
	extraVals = make([][]float64, len(extraIdx))
	extraText = make([][]string, len(extraIdx))
	numeric := make([]bool, len(extraIdx))
	quotedAll := make([]bool, len(extraIdx))
	filled := make([]bool, len(extraIdx))
	rangeErr := make([]error, len(extraIdx))
	for k := range numeric {
		numeric[k], quotedAll[k] = true, true
	}
	idQuoted := false
	// checkRange refuses a number float64 does not hold unless allowed.
	checkRange := func(n number, line, col int, cell []byte) error {
		if n.rng != rangeOK && !opt.AllowOutOfRange {
			return perr(path, line, col, hintOutOfRange, "%q is %s", clip(cell), n.rng)
		}
		return nil
	}
	for _, r := range rows {
		if len(r.cells) != len(fields) {
			return nil, perr(path, r.line, min(len(r.cells), len(fields))+1, "every row needs as many fields as the header", "row has %d fields, expected %d", len(r.cells), len(fields))
		}
		// The unit column holds the unit's label as written; it is matched
		// with the discharge file's labels, never read as a number.
		label := string(r.cells[idCol])
		if label == "" {
			return nil, perr(path, r.line, idCol+1, "write the unit's label as in the discharge file", "the row has no unit label")
		}
		if l, dup := seen[label]; dup {
			return nil, perr(path, r.line, idCol+1, "each unit may appear once", "duplicate unit %q (first on line %d)", label, l)
		}
		seen[label] = r.line
		idQuoted = idQuoted || r.quoted[idCol]
		u := record.NewUnit(int64(len(ut.Units) + 1))
		u.Label = label
		if storedCol >= 0 {
			id, err := strconv.ParseInt(string(r.cells[storedCol]), 10, 64)
			if err != nil || id < 0 {
				return nil, perr(path, r.line, storedCol+1, "leave muarc_id as export wrote it (whole numbers), or drop the column", "muarc_id %q is not a whole number", clip(r.cells[storedCol]))
			}
			ut.StoredIDs = append(ut.StoredIDs, id)
		}
		for i, f := range fields {
			if f == "" || f == FieldID || f == StoredIDColumn {
				continue
			}
			n, k := parseNumber(r.cells[i], lay.dialect.DecimalComma)
			if k == cellText {
				return nil, perr(path, r.line, i+1, "write a number, or leave the cell empty when not known", "text %q in a numeric cell", clip(r.cells[i]))
			}
			if err := checkRange(n, r.line, i+1, r.cells[i]); err != nil {
				return nil, err
			}
			v := n.v
			if k != cellNumber {
				v = math.NaN()
			}
			setField(&u, f, v)
		}
		for k, i := range extraIdx {
			c := r.cells[i]
			n, kind := parseNumber(c, lay.dialect.DecimalComma)
			if kind == cellText {
				numeric[k] = false
			} else if err := checkRange(n, r.line, i+1, c); err != nil && rangeErr[k] == nil {
				rangeErr[k] = err // refused only if the column stays numeric
			}
			if len(c) > 0 || r.quoted[i] {
				filled[k] = true
				quotedAll[k] = quotedAll[k] && r.quoted[i]
			}
			v := n.v
			if kind != cellNumber {
				v = math.NaN()
			}
			extraVals[k] = append(extraVals[k], v)
			extraText[k] = append(extraText[k], string(r.raw[i]))
		}
		ut.Units = append(ut.Units, u)
	}
	names := map[string]bool{}
	for _, f := range fields {
		names[f] = true
	}
	for k, i := range extraIdx {
		l, _, _ := splitLabelUnit(lay.header[i])
		name := snakeKey(l)
		if name == "" || names[name] {
			return nil, perr(path, lay.headerLine, i+1, "give each extra column a distinct name", "extra column %q has no usable name", lay.header[i])
		}
		names[name] = true
		col := record.Column{Name: name, Unit: units[i]}
		if numeric[k] && filled[k] && quotedAll[k] && !idQuoted {
			// Every cell quoted where the ids are not: the writer marked
			// the column as text (as muarc export and R's write.csv do).
			numeric[k] = false
			ut.Notes = append(ut.Notes, fmt.Sprintf("column %q kept as text: every cell is quoted", lay.header[i]))
		}
		if numeric[k] && rangeErr[k] != nil {
			return nil, rangeErr[k]
		}
		if numeric[k] {
			col.Values = extraVals[k]
		} else {
			col.Text = extraText[k]
		}
		ut.Extra = append(ut.Extra, col)
		ut.Notes = append(ut.Notes, fmt.Sprintf("column %q kept as extra column %q", lay.header[i], name))
	}
	return ut, nil
}

// setField sets the figure f (a registry name of the unit group) of u.
func setField(u *record.Unit, f string, v float64) {
	for _, b := range fieldbind.Bind(u, "unit") {
		if b.Name() == f {
			b.Set(v)
		}
	}
}

// getField is figure f of u; NaN for a name that is not a figure.
func getField(u *record.Unit, f string) float64 {
	for _, b := range fieldbind.Bind(u, "unit") {
		if b.Name() == f && b.Field.Kind == schema.KindNumber {
			return b.Get().(float64)
		}
	}
	return math.NaN()
}

// unitFields lists the figure fields in layout order: the number fields of
// the registry's unit group.
var unitFields = schema.FieldNamesOfKind("unit", schema.KindNumber)
