package convert

import (
	"bytes"
	"fmt"
	"math"
	"slices"
	"strings"
)

// A discharge file is read by trying every reading the options leave open
// (delimiter, decimal comma, header, shape, labels, time base, first
// index) and keeping those that fit the text and the EMG's sample grid.
// Detection decides alone only when every reading that fits stores the
// same units and discharges; otherwise the file is refused with the
// readings that differ and the options that pick each one.

// reading is one way to read a discharge file.
type reading struct {
	delim  byte
	comma  bool // decimal comma
	colon  bool // "label: t1 t2 ..." lines
	header bool
	shape  string
	labels bool
	base   string // "s", "ms" or "samples"
	first  int    // 0 or 1 for samples
	// opt are the options given (evidence rules apply to the others).
	opt *DischargeOptions
}

// rfail says why a reading does not fit. soft failures (a unit's times out
// of order in the file, two discharges of one unit on one sample, nothing
// read at all) rule a reading out only while detection chooses.
type rfail struct {
	line, col int
	msg, hint string
	soft      bool
	// unsorted marks the soft failure "times out of order".
	unsorted bool
	// weak marks a soft failure that only prefers one reading over
	// another (every unit with at most one discharge, a header cell that
	// looks like numbers): a reading failing only such rules is still
	// read when every reading that fits the text stores the same values.
	weak bool
}

// fallback reports whether a soft failure may leave the reading possible
// when no reading passes every rule: times out of order (sorted, with a
// note) and the weak preferences; not two discharges of a unit within
// 1 ms.
func (f *rfail) fallback() bool { return f == nil || f.unsorted || f.weak && weakRulesYield }

// weakRulesYield is false only in the oracle's measurement of the refusal
// rate without the fallback (the same generated files, one run).
var weakRulesYield = true

// minISIs is the shortest interval between two discharges of one motor
// unit a reading may store while detection chooses, in seconds: 1 ms,
// shorter than a motor neuron's absolute refractory period (from memory;
// doublets start at about 2.5 ms).
const minISIs = 0.001

// tcell is one time cell of a unit.
type tcell struct {
	v         float64
	line, col int
	integral  bool
	// halfUnit is half a unit in the last digit written ("2049.805":
	// 0.0005): the written time stands for any value that close. 0 when
	// not known (then any grid distance is within the digits).
	halfUnit float64
}

// sunit is one unit as a reading's structure sees it: a label and cells.
type sunit struct {
	label     string
	line, col int
	cells     []tcell
}

// structure is a file read under a dialect, header, shape and labels.
type structure struct {
	units []sunit
	// base and first come from header marks ("[ms]", "(1-based)"); ""
	// and -1 when the header says nothing.
	base  string
	first int
	rows  int
	fail  *rfail
	soft  *rfail
}

// dialectKey is a delimiter and a decimal separator.
type dialectKey struct {
	delim        byte
	comma, colon bool
}

// cutLine splits one table line under a dialect.
func cutLine(l dline, dk dialectKey) ([][]byte, *rfail) {
	text := l.text
	if dk.colon {
		_, text, _ = colonSplit(text)
	}
	cells, err := splitCells(text, dk.delim)
	if err != nil {
		return nil, &rfail{line: l.line, msg: err.Error(), hint: "close every quote on its line, and write a quote inside a quoted cell as \"\""}
	}
	if dk.colon {
		cells = append([][]byte{[]byte(l.key)}, cells...)
	}
	return cells, nil
}

// cellSource gives the cells of table line i under one dialect.
type cellSource func(i int) ([][]byte, *rfail)

func textCell(c []byte, comma bool) bool {
	_, k := parseNumber(c, comma)
	return k == cellText
}

// build reads the structure of lines (cells cut under r's dialect) under
// r's header, shape and labels.
func build(lines []dline, cellsAt cellSource, r reading, g Grid) structure {
	s := structure{first: -1}
	fail := func(line, col int, hint, format string, args ...any) structure {
		s.fail = &rfail{line: line, col: col, msg: fmt.Sprintf(format, args...), hint: hint}
		return s
	}
	start := 0
	var hdr [][]byte
	if r.header {
		var f *rfail
		if hdr, f = cellsAt(0); f != nil {
			s.fail = f
			return s
		}
		start = 1
		text := false
		for _, c := range hdr {
			text = text || textCell(c, r.comma)
		}
		if !text && (r.shape == ShapeLong || r.shape == ShapeLines) {
			return fail(lines[0].line, 1, "", "the first line holds only numbers, so it is not a header")
		}
		// What the header says decides the shape and labels when they are
		// detected: "unit" over a column of labels, "t1 (ms)" over times.
		if f := headerEvidence(hdr, r, lines[0].line); f != nil && f.weak {
			s.soft = f
		} else if f != nil {
			s.fail = f
			return s
		}
		var marks []string
		switch r.shape {
		case ShapeLong:
			if len(hdr) != 2 {
				return fail(lines[0].line, 0, "a long table has a unit column and a time column", "header has %d columns", len(hdr))
			}
			marks = []string{string(hdr[1])}
		case ShapeLines:
			for _, c := range hdr[1:] {
				marks = append(marks, string(c))
			}
			if !r.labels {
				marks = append(marks, string(hdr[0]))
			}
		default:
			for _, c := range hdr {
				marks = append(marks, string(c))
			}
		}
		for i, m := range marks {
			b, f := timeMark(m)
			if b != "" {
				if s.base != "" && s.base != b {
					return fail(lines[0].line, i+1, "give every column of the header the same time unit", "the header names times in %s and in %s", s.base, b)
				}
				s.base = b
			}
			if f >= 0 {
				s.first = f
				s.base = "samples"
			}
		}
	}
	rowLines := lines[start:]
	if len(rowLines) == 0 && r.shape != ShapeColumns {
		return fail(lines[0].line, 0, "", "no rows after the header")
	}
	// each calls fn with every row's cells; it stops at the first failure.
	each := func(fn func(ln int, row [][]byte) *rfail) *rfail {
		for i := range rowLines {
			row, f := cellsAt(start + i)
			if f != nil {
				return f
			}
			if f := fn(rowLines[i].line, row); f != nil {
				return f
			}
		}
		return nil
	}
	seen := map[string]int{}
	addUnit := func(label string, line, col int) (int, *rfail) {
		if r.comma && strings.Contains(label, ",") && r.opt.DecimalComma != "yes" {
			return 0, &rfail{line: line, col: col, msg: fmt.Sprintf("label %q holds the decimal comma", label)}
		}
		if r.opt.Delimiter == 0 && strings.ContainsAny(label, ",;\t") {
			// An unquoted label holding a delimiter is a sign of the wrong
			// delimiter ("1,0.512" read as one cell).
			i, _ := slices.BinarySearchFunc(lines, line, func(l dline, n int) int { return l.line - n })
			if i < len(lines) && lines[i].line == line && !bytes.ContainsRune(lines[i].text, '"') {
				return 0, &rfail{line: line, col: col, msg: fmt.Sprintf("label %q holds a delimiter", label)}
			}
		}
		if label != "" && special([]byte(label)) == cellNaN {
			return 0, &rfail{line: line, col: col, msg: fmt.Sprintf("%q marks a missing value, not a unit label", label)}
		}
		if label != "" {
			if l, dup := seen[label]; dup {
				return 0, &rfail{line: line, col: col, msg: fmt.Sprintf("unit label %q also names the unit on line %d", label, l), hint: "give each unit its own label, or merge the two"}
			}
			seen[label] = line
		}
		s.units = append(s.units, sunit{label: label, line: line, col: col})
		return len(s.units) - 1, nil
	}
	timeCell := func(c []byte, line, col int) (tcell, bool, *rfail) {
		n, k := parseNumber(c, r.comma)
		switch {
		case k == cellEmpty || k == cellNaN:
			return tcell{}, false, nil
		case k != cellNumber:
			return tcell{}, false, &rfail{line: line, col: col, msg: fmt.Sprintf("text %q where a time belongs", clip(c)), hint: "write each time as a number"}
		case math.IsInf(n.v, 0) || math.IsNaN(n.v):
			return tcell{}, false, &rfail{line: line, col: col, msg: fmt.Sprintf("%q is not a finite time", clip(c)), hint: "write each time as a finite number"}
		}
		tc := tcell{v: n.v, line: line, col: col, integral: n.v == math.Trunc(n.v)}
		if n.digits > 0 && n.digits <= 19 {
			tc.halfUnit = 0.5 * math.Pow(10, float64(n.exp10))
		}
		return tc, true, nil
	}
	switch r.shape {
	case ShapeLines:
		s.fail = each(func(ln int, row [][]byte) *rfail {
			times := row
			label := ""
			if len(row) == 0 {
				return &rfail{line: ln, col: 1, msg: "the line holds no cells"}
			}
			if r.labels {
				label = string(row[0])
				if label == "" {
					return &rfail{line: ln, col: 1, hint: "start each line with the unit's label", msg: "the line has no label"}
				}
				if !r.colon && strings.HasSuffix(label, ":") {
					return &rfail{line: ln, col: 1, msg: fmt.Sprintf("label %q ends in ':' (the label: times form)", label)}
				}
				times = row[1:]
			}
			u, f := addUnit(label, ln, 1)
			if f != nil {
				return f
			}
			col0 := len(row) - len(times)
			gap := 0
			for j, c := range times {
				tc, ok, f := timeCell(c, ln, col0+j+1)
				if f != nil {
					return f
				}
				if !ok {
					if gap == 0 {
						gap = col0 + j + 1
					}
					continue
				}
				if gap > 0 {
					return &rfail{line: ln, col: gap, hint: "leave blanks only at the end of a line", msg: "an empty cell inside the line"}
				}
				s.units[u].cells = append(s.units[u].cells, tc)
			}
			return nil
		})
		if s.fail == nil && r.labels && !r.colon && r.opt.Labels == "" {
			empty := true
			for _, u := range s.units {
				empty = empty && len(u.cells) == 0
			}
			// Without a header naming a label column and time columns,
			// labels without a single time are not a reading of the
			// file (one number per line is then times); with one, the
			// header has said so.
			if empty && (!r.header || !weakRulesYield) {
				return fail(rowLines[0].line, 2, "", "no line holds a time after its label")
			}
		}
	case ShapeLong:
		byLabel := map[string]int{}
		s.fail = each(func(ln int, row [][]byte) *rfail {
			if len(row) != 2 {
				return &rfail{line: ln, col: min(len(row)+1, 3), hint: "each row holds a unit label and one time", msg: fmt.Sprintf("row has %d fields, expected 2", len(row))}
			}
			label := string(row[0])
			if label == "" {
				return &rfail{line: ln, col: 1, hint: "write the unit's label in the first column", msg: "the row has no unit label"}
			}
			u, ok := byLabel[label]
			if !ok {
				var f *rfail
				if u, f = addUnit(label, ln, 1); f != nil {
					return f
				}
				byLabel[label] = u
			}
			tc, ok, f := timeCell(row[1], ln, 2)
			if f != nil {
				return f
			}
			if !ok {
				return &rfail{line: ln, col: 2, hint: "write each time as a number", msg: "no time in the row"}
			}
			s.units[u].cells = append(s.units[u].cells, tc)
			return nil
		})
	case ShapeColumns, ShapeMatrix:
		n := 0
		if hdr != nil {
			n = len(hdr)
			for i, h := range hdr {
				label := stripTimeMark(string(h))
				if label == "" {
					return fail(lines[0].line, i+1, "give each column its unit's label", "column %d has no label", i+1)
				}
				if _, f := addUnit(label, lines[0].line, i+1); f != nil {
					s.fail = f
					return s
				}
			}
		} else {
			first, f := cellsAt(0)
			if f != nil {
				s.fail = f
				return s
			}
			n = len(first)
			if n == 0 {
				return fail(rowLines[0].line, 1, "", "the first row holds no cells")
			}
			for i := 0; i < n; i++ {
				addUnit("", rowLines[0].line, i+1) // unlabelled: cannot fail
			}
		}
		gap := make([]int, n)
		s.fail = each(func(ln int, row [][]byte) *rfail {
			if len(row) > n {
				return &rfail{line: ln, col: n + 1, hint: "every row needs as many fields as the first line", msg: fmt.Sprintf("row has %d fields, expected %d", len(row), n)}
			}
			if r.shape == ShapeMatrix {
				if len(row) != n {
					return &rfail{line: ln, col: len(row) + 1, hint: "a pulse-train matrix has a 0 or 1 in every cell", msg: fmt.Sprintf("row has %d fields, expected %d", len(row), n)}
				}
				for j, c := range row {
					switch string(c) {
					case "0":
					case "1":
						s.units[j].cells = append(s.units[j].cells, tcell{v: float64(s.rows), line: ln, col: j + 1, integral: true})
					default:
						return &rfail{line: ln, col: j + 1, hint: "a pulse-train matrix holds only 0 and 1", msg: fmt.Sprintf("cell %q", clip(c))}
					}
				}
				s.rows++
				return nil
			}
			for j := 0; j < n; j++ {
				var c []byte
				if j < len(row) {
					c = row[j]
				}
				tc, ok, f := timeCell(c, ln, j+1)
				if f != nil {
					return f
				}
				if !ok {
					if gap[j] == 0 {
						gap[j] = ln
					}
					continue
				}
				if gap[j] > 0 {
					return &rfail{line: gap[j], col: j + 1, hint: "leave blanks only at the end of a column", msg: fmt.Sprintf("an empty cell inside column %d", j+1)}
				}
				s.units[j].cells = append(s.units[j].cells, tc)
			}
			return nil
		})
		if s.fail != nil {
			return s
		}
		if r.shape == ShapeMatrix {
			if s.rows > g.Samples {
				return fail(rowLines[g.Samples].line, 1, "a pulse-train matrix has one row per EMG sample", "the matrix has more rows (%d) than the EMG has samples (%d)", s.rows, g.Samples)
			}
			if s.base != "" && s.base != "samples" {
				return fail(lines[0].line, 1, "", "a pulse-train matrix counts samples, the header names %s", s.base)
			}
		}
	}
	return s
}

// place puts a structure's times on the grid under r's time base: the
// units (labels and sorted sample indices), or why r does not fit.
//
// offDigits is set when a time lies farther from every sample than the
// digits written allow (and than tol): evidence against this time base
// that only decides between readings that would otherwise store
// different values.
func place(s *structure, r reading, g Grid, tol float64) (units []UnitTrain, fail, soft *rfail, offGrid int, worst float64, offDigits *rfail) {
	var unsorted *rfail
	out := make([]UnitTrain, len(s.units))
	total := 0
	for ui, u := range s.units {
		tr := UnitTrain{ID: int64(ui + 1), Label: u.label, Discharges: make([]int64, 0, len(u.cells))}
		prev := int64(math.MinInt64)
		for _, c := range u.cells {
			var x float64
			switch r.base {
			case "s":
				x = (c.v - g.StartS) * g.RateHz
			case "ms":
				x = (c.v/1000 - g.StartS) * g.RateHz
			default:
				if !c.integral {
					return nil, &rfail{line: c.line, col: c.col, msg: fmt.Sprintf("sample index %g has a fraction", c.v), hint: "sample indices are whole numbers; times in s or ms are read with --time-base"}, nil, 0, 0, nil
				}
				x = c.v - float64(r.first)
			}
			k := math.Round(x)
			if d := math.Abs(x - k); d > tol {
				offGrid++
				worst = math.Max(worst, d)
				// Off the grid by more than the digits written allow:
				// this time base does not put the time on a sample.
				if hw := c.halfUnit * perUnit(r.base, g.RateHz); offDigits == nil && c.halfUnit > 0 && d > hw+1e-6 {
					offDigits = &rfail{line: c.line, col: c.col,
						msg: fmt.Sprintf("time %g %s lies %.3g samples from the nearest sample, more than its digits allow (±%.3g)", c.v, r.base, d, hw)}
				}
			}
			if k < 0 {
				return nil, &rfail{line: c.line, col: c.col, msg: fmt.Sprintf("discharge at %g %s is before the recording starts", c.v, r.base), hint: "check the time base and the start of the EMG"}, nil, 0, 0, nil
			}
			if k >= float64(g.Samples) {
				return nil, &rfail{line: c.line, col: c.col, msg: fmt.Sprintf("discharge at %g %s is after the end of the recording (sample %.0f of %d)", c.v, r.base, k, g.Samples), hint: "check the time base (s, ms, samples, 0- or 1-based) and that the file belongs to this EMG"}, nil, 0, 0, nil
			}
			ki := int64(k)
			if unsorted == nil && ki < prev {
				unsorted = &rfail{line: c.line, col: c.col, soft: true, unsorted: true, msg: fmt.Sprintf("unit %s: times out of order in the file", unitName(u.label, ui)), hint: "write each unit's times in ascending order"}
			}
			prev = ki
			tr.Discharges = append(tr.Discharges, ki)
		}
		total += len(tr.Discharges)
		slices.Sort(tr.Discharges)
		for i := 1; soft == nil && i < len(tr.Discharges); i++ {
			if d := tr.Discharges[i] - tr.Discharges[i-1]; float64(d) < minISIs*g.RateHz {
				soft = &rfail{line: u.line, col: u.col, soft: true, msg: fmt.Sprintf("unit %s: two discharges %g ms apart (samples %d and %d)", unitName(u.label, ui), float64(d)/g.RateHz*1000, tr.Discharges[i-1], tr.Discharges[i]),
					hint: "a motor unit does not discharge twice within 1 ms"}
			}
		}
		out[ui] = tr
	}
	if soft == nil {
		soft = unsorted
	}
	most := 0
	for _, u := range out {
		most = max(most, len(u.Discharges))
	}
	if soft == nil && len(out) >= 3 && most <= 1 {
		soft = &rfail{soft: true, weak: true, line: s.units[0].line, msg: fmt.Sprintf("none of the %d units would have more than one discharge", len(out))}
	}
	return out, nil, soft, offGrid, worst, offDigits
}

// perUnit is the number of samples in one unit of a time base.
func perUnit(base string, rateHz float64) float64 {
	switch base {
	case "s":
		return rateHz
	case "ms":
		return rateHz / 1000
	}
	return 1
}

func unitName(label string, i int) string {
	if label != "" {
		return fmt.Sprintf("%q", label)
	}
	return fmt.Sprintf("#%d", i+1)
}

// sameUnits reports whether two readings store the same values.
func sameUnits(a, b []UnitTrain) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i].Label != b[i].Label || len(a[i].Discharges) != len(b[i].Discharges) {
			return false
		}
		if !slices.Equal(a[i].Discharges, b[i].Discharges) {
			return false
		}
	}
	return true
}

// timeMark reads a time unit or an index base from a header cell:
// "t1 (ms)", "MU 4 [samples]", "time_s", "sample (1-based)". base is ""
// and first -1 when the cell names neither.
func timeMark(h string) (base string, first int) {
	first = -1
	_, u, has := splitLabelUnit(h)
	if has {
		switch strings.ToLower(strings.TrimSpace(u)) {
		case "0-based":
			return "samples", 0
		case "1-based":
			return "samples", 1
		}
	}
	return timeBaseOf(h), first
}

// stripTimeMark takes a time unit or index base off a column label:
// "MU20 (ms)" is unit MU20. Other bracketed text stays in the label.
func stripTimeMark(h string) string {
	l, _, has := splitLabelUnit(h)
	if b, f := timeMark(h); has && (b != "" || f >= 0) {
		return l
	}
	return strings.TrimSpace(h)
}
