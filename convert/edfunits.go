package convert

import (
	"fmt"
	"math"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"muarc/edfplus"
	"muarc/record"
)

// Annotation texts that carry motor units in EDF+/BDF+ files (muarc's
// convention; EDF+ leaves annotation texts free, PROFILES.md "EDF and BDF
// files"). Array and decomposition names are group names (no blank, no
// slash), so each text has one reading:
//
//	unit ARRAY/DECOMPOSITION id N: LABEL   a unit, its muarc id and its label as written
//	discharge ARRAY/DECOMPOSITION id N     a discharge of declared unit N
//	discharge ARRAY/DECOMPOSITION unit L   a discharge of the unit labelled L
//
// muarc's export writes the first two (a declaration per unit, in the unit
// table's order, at the file's start); the third is the form to write by
// hand or from another program.
var (
	unitDeclText       = regexp.MustCompile(`^unit ([A-Za-z0-9_.-]+)/([A-Za-z0-9_.-]+) id (-?[0-9]{1,18}):(?: (.*))?$`)
	dischargeIDText    = regexp.MustCompile(`^discharge ([A-Za-z0-9_.-]+)/([A-Za-z0-9_.-]+) id (-?[0-9]{1,18})$`)
	dischargeLabelText = regexp.MustCompile(`^discharge ([A-Za-z0-9_.-]+)/([A-Za-z0-9_.-]+) unit (.+)$`)
	// Texts that begin like a unit or a discharge but follow no form.
	dischargeLike = regexp.MustCompile(`(?i)^\s*discharges?\b`)
	unitDeclLike  = regexp.MustCompile(`(?i)^\s*unit\s+\S+/\S+\s+id\b`)
)

// UnitDeclaration is the annotation text that declares a unit:
// "unit ARRAY/DECOMPOSITION id N: LABEL" (": " and the label left out when
// the label is empty).
func UnitDeclaration(array, decomposition string, id int64, label string) string {
	s := fmt.Sprintf("unit %s/%s id %d:", array, decomposition, id)
	if label != "" {
		s += " " + label
	}
	return s
}

// DischargeAnnotation is the annotation text of one discharge of a declared
// unit: "discharge ARRAY/DECOMPOSITION id N". Its onset is the discharge
// time in seconds from the file start.
func DischargeAnnotation(array, decomposition string, id int64) string {
	return fmt.Sprintf("discharge %s/%s id %d", array, decomposition, id)
}

// Values of ProfileEDF.Annotations.
const (
	// EDFAnnotationsUnits reads unit and discharge annotations (the default).
	EDFAnnotationsUnits = "units"
	// EDFAnnotationsNotes keeps every annotation as text and reads no
	// discharges.
	EDFAnnotationsNotes = "notes"
)

// edfUnits reads the unit declarations and discharges among a trial's
// annotations (in file order) into the trial's decompositions and returns
// the other annotations and the number of discharges. Labels are kept as
// written; a unit without a declaration gets the next id of its
// decomposition, so undeclared units are numbered 1..N in order of first
// appearance. A text with two readings is refused naming both.
func (pl *Plan) edfUnits(it input, t *record.Trial, anns []edfplus.Annotation, mode string) (rest []edfplus.Annotation, count int, err error) {
	if mode == EDFAnnotationsNotes {
		return anns, 0, nil
	}
	bad := func(an edfplus.Annotation, hint, format string, a ...any) error {
		return &ParseError{File: it.path, Msg: fmt.Sprintf("annotation %q at %s s: ", an.Text, an.OnsetText) + fmt.Sprintf(format, a...), Hint: hint}
	}
	arrayOf := func(an edfplus.Annotation, name string) (*record.Array, error) {
		for ai := range t.Arrays {
			if t.Arrays[ai].Name == name && t.Arrays[ai].SamplingRateHz > 0 {
				return &t.Arrays[ai], nil
			}
		}
		return nil, bad(an, "map the array's signals in the profile (edf.arrays)", "names array %q, which this file does not hold", name)
	}
	// Declared ids by "ARRAY/DECOMPOSITION" (decompositions move when one is
	// added, so they are not keyed by pointer).
	declared := map[string]map[int64]bool{}
	unitByID := func(d *record.Decomposition, id int64) int {
		for k := range d.Units {
			if d.Units[k].ID == id {
				return k
			}
		}
		return -1
	}
	for _, an := range anns {
		if m := unitDeclText.FindStringSubmatch(an.Text); m != nil {
			a, err := arrayOf(an, m[1])
			if err != nil {
				return nil, 0, err
			}
			d := decompNamed(a, m[2])
			id, _ := strconv.ParseInt(m[3], 10, 64)
			key := a.Name + "/" + d.Name
			if declared[key] == nil {
				declared[key] = map[int64]bool{}
			}
			if declared[key][id] || unitByID(d, id) >= 0 {
				return nil, 0, bad(an, "declare each unit once", "unit id %d of %s is declared twice", id, key)
			}
			declared[key][id] = true
			u := record.NewUnit(id)
			u.Label = m[4]
			d.Units = append(d.Units, u)
			continue
		}
		var a *record.Array
		var d *record.Decomposition
		ui := -1
		switch m, ml := dischargeIDText.FindStringSubmatch(an.Text), dischargeLabelText.FindStringSubmatch(an.Text); {
		case m != nil:
			if a, err = arrayOf(an, m[1]); err != nil {
				return nil, 0, err
			}
			d = decompNamed(a, m[2])
			id, _ := strconv.ParseInt(m[3], 10, 64)
			if ui = unitByID(d, id); ui < 0 || !declared[a.Name+"/"+d.Name][id] {
				return nil, 0, bad(an, fmt.Sprintf("declare the unit before its discharges (%q), or name it by its label (\"discharge %s/%s unit LABEL\")", UnitDeclaration(m[1], m[2], id, "LABEL"), m[1], m[2]),
					"unit id %d of %s/%s is not declared in the file", id, m[1], m[2])
			}
		case ml != nil:
			if a, err = arrayOf(an, ml[1]); err != nil {
				return nil, 0, err
			}
			d = decompNamed(a, ml[2])
			label := ml[3]
			if trimmed := strings.TrimSpace(label); trimmed != label {
				return nil, 0, bad(an, "write one blank after \"unit\" and none after the label",
					"the label could be read as %q (as written) or as %q (blanks at its edges left out)", label, trimmed)
			}
			var same []int
			for k := range d.Units {
				if d.Units[k].Label == label {
					same = append(same, k)
				}
			}
			switch len(same) {
			case 0:
				var next int64 = 1
				for _, u := range d.Units {
					next = max(next, u.ID+1)
				}
				u := record.NewUnit(next)
				u.Label = label
				d.Units = append(d.Units, u)
				ui = len(d.Units) - 1
			case 1:
				ui = same[0]
			default:
				return nil, 0, bad(an, fmt.Sprintf("name the unit by its id (\"discharge %s/%s id N\")", a.Name, d.Name),
					"label %q could be unit id %d or unit id %d of %s/%s, which share it", label, d.Units[same[0]].ID, d.Units[same[1]].ID, a.Name, d.Name)
			}
		case dischargeLike.MatchString(an.Text) || unitDeclLike.MatchString(an.Text):
			return nil, 0, bad(an, "write it as \"discharge ARRAY/DECOMPOSITION unit LABEL\" (one blank between the parts), or give the profile edf.annotations: notes to keep every annotation as text",
				"it could be a unit or a discharge in a form muarc does not read, or a note to keep as text")
		default:
			rest = append(rest, an)
			continue
		}
		x := (an.OnsetS - a.StartS) * a.SamplingRateHz
		idx := math.Round(x)
		rows, _ := a.Samples.Shape()
		if math.Abs(x-idx) > 0.1 || idx < 0 || int(idx) >= rows {
			return nil, 0, bad(an, "discharge annotations must fall on the array's samples (0.1-sample tolerance)",
				"%.3f samples into array %s, not on a sample inside the recording", x, a.Name)
		}
		d.Units[ui].Discharges = append(d.Units[ui].Discharges, int64(idx))
		count++
	}
	for ai := range t.Arrays {
		for di := range t.Arrays[ai].Decompositions {
			for ui := range t.Arrays[ai].Decompositions[di].Units {
				u := &t.Arrays[ai].Decompositions[di].Units[ui]
				sort.Slice(u.Discharges, func(p, q int) bool { return u.Discharges[p] < u.Discharges[q] })
			}
		}
	}
	return rest, count, nil
}
