package convert

import (
	"bytes"
	"fmt"
	"math"
)

// headLines is how many table lines every reading is tried on first; the
// readings that fit them are then read whole.
const headLines = 4000

// ReadDischarges reads a discharge file in any of the four shapes onto the
// sample grid g. Units are numbered 1..N in file order and keep their
// labels as written. Options left empty are detected only where the
// evidence is conclusive: every reading of the text that fits stores the
// same values. Otherwise the file is refused with a ParseError naming the
// readings and the options that pick each one.
func ReadDischarges(path string, g Grid, opt DischargeOptions) (*Discharges, error) {
	if !(g.RateHz > 0) || math.IsInf(g.RateHz, 0) || g.Samples <= 0 || math.IsNaN(g.StartS) || math.IsInf(g.StartS, 0) {
		return nil, perr(path, 0, 0, "import the EMG the discharges belong to", "no sample grid for the discharges")
	}
	if err := checkDischargeOptions(path, opt); err != nil {
		return nil, err
	}
	t, err := readDischText(path)
	if err != nil {
		return nil, err
	}
	t.opt = opt
	cands := dischargeReadings(t, opt)
	if len(cands) == 0 {
		return nil, perr(path, t.lines[0].line, 0, "the options given exclude every reading: a long table has labels, a colon form is one line per unit", "no reading of the file fits the options given")
	}
	tol := opt.ToleranceSamples
	if tol <= 0 {
		tol = 0.1
	}
	multi := len(cands) > 1
	head := t.lines
	if len(head) > headLines {
		head = head[:headLines]
	}
	res := evaluate(t, head, cands, g, tol)
	if len(head) < len(t.lines) {
		var again []reading
		for _, r := range res {
			if r.fail == nil && (!multi || r.soft.fallback()) {
				again = append(again, r.r)
			}
		}
		full := evaluate(t, t.lines, again, g, tol)
		// Readings ruled out on the head keep their reason.
		byR := map[reading]*result{}
		for i := range full {
			byR[full[i].r] = &full[i]
		}
		for i := range res {
			if f := byR[res[i].r]; f != nil {
				res[i] = *f
			}
		}
	}
	var ok []*result
	// A weak preference does not rule a reading out: readings that fit
	// the text and store different values are refused, whichever of
	// them such a rule would prefer.
	for i := range res {
		if f := res[i].soft; res[i].fail == nil && (!multi || f == nil || f.weak && !f.unsorted && weakRulesYield) {
			ok = append(ok, &res[i])
		}
	}
	// When no reading passes every rule, times out of order do not rule a
	// reading out (sorted, with a note): the readings left are read only
	// if they all store the same values, else refused naming them.
	if len(ok) == 0 && multi {
		for i := range res {
			if f := res[i].soft; res[i].fail == nil && f != nil && f.unsorted && (weakRulesYield || !f.weak) {
				ok = append(ok, &res[i])
			}
		}
	}
	groups := groupResults(ok)
	// Readings that store different values, where all but one group put
	// some time off the sample grid by more than its digits allow: the
	// digits decide (the sampling rate fits only one time base).
	var byDigits *result
	if len(groups) > 1 && weakRulesYield {
		var on []*result
		for _, r := range ok {
			if r.offDigits == nil {
				on = append(on, r)
			} else if byDigits == nil {
				byDigits = r
			}
		}
		if g2 := groupResults(on); len(g2) == 1 {
			groups = g2
		} else {
			byDigits = nil
		}
	}
	switch {
	case len(groups) == 0:
		traceRefusal("no reading fits", nil)
		return nil, noReading(t, res, opt)
	case len(groups) > 1:
		guess := true
		for _, g := range groups {
			for _, r := range g {
				guess = guess && r.firstGuess
			}
		}
		if guess {
			traceRefusal("1-based only, not said", nil)
			return nil, firstIndexGuess(t, res, groups[0][0], opt)
		}
		traceRefusal("readings differ", separating(groups))
		return nil, ambiguous(t, groups, opt)
	}
	chosen := groups[0][0]
	for _, r := range groups[0] {
		if !r.firstGuess {
			chosen = r
			break
		}
	}
	if chosen.firstGuess {
		traceRefusal("1-based only, not said", nil)
		return nil, firstIndexGuess(t, res, chosen, opt)
	}
	dc := accept(t, chosen, res, multi, opt, tol)
	if byDigits != nil {
		f := byDigits.offDigits
		dc.Notes = append(dc.Notes, fmt.Sprintf("not %s: line %d: %s", byDigits.r.describe(), f.line, f.msg))
	}
	return dc, nil
}

// groupResults gathers readings that store the same values.
func groupResults(ok []*result) [][]*result {
	var groups [][]*result
	for _, r := range ok {
		placed := false
		for gi := range groups {
			if sameUnits(groups[gi][0].units, r.units) {
				groups[gi] = append(groups[gi], r)
				placed = true
				break
			}
		}
		if !placed {
			groups = append(groups, []*result{r})
		}
	}
	return groups
}

// refusalTrace, when set (by the oracle's measurement), is told the kind
// of each refusal and, for readings that differ, the options that tell
// them apart.
var refusalTrace func(kind string, dims []string)

func traceRefusal(kind string, dims []string) {
	if refusalTrace != nil {
		refusalTrace(kind, dims)
	}
}

func checkDischargeOptions(path string, opt DischargeOptions) error {
	bad := func(flag, v, want string) error {
		return &ParseError{File: path, Msg: fmt.Sprintf("%s %q", flag, v), Hint: "want " + want}
	}
	switch opt.Shape {
	case "", ShapeColumns, ShapeLong, ShapeLines, ShapeMatrix:
	default:
		return bad("shape", opt.Shape, "columns, long, lines or matrix")
	}
	switch opt.Labels {
	case "", "yes", "no":
	default:
		return bad("labels", opt.Labels, "yes or no")
	}
	switch opt.TimeBase {
	case "", "s", "ms", "samples":
	default:
		return bad("time base", opt.TimeBase, "s, ms or samples")
	}
	if opt.FirstIndex < -1 || opt.FirstIndex > 1 {
		return bad("first index", fmt.Sprint(opt.FirstIndex), "0 or 1")
	}
	if opt.DecimalComma == "yes" && opt.Delimiter == ',' {
		return &ParseError{File: path, Msg: "a decimal comma cannot be read with a comma delimiter", Hint: "give the delimiter as semicolon, tab or whitespace"}
	}
	return nil
}

// result is one reading tried on the file.
type result struct {
	r          reading
	units      []UnitTrain
	fail, soft *rfail
	offGrid    int
	worst      float64
	headerOpen bool // the header said nothing about the time base
	// firstGuess is true for a 1-based reading neither given nor marked in
	// the header: detection never picks 1-based on its own.
	firstGuess bool
	// offDigits names a time this reading puts off the sample grid by
	// more than its digits allow.
	offDigits *rfail
}

// dischargeReadings lists the readings the options leave open, the most
// common first.
func dischargeReadings(t *dischText, opt DischargeOptions) []reading {
	var delims []byte
	switch {
	case t.colon && opt.Delimiter != 0:
		delims = []byte{opt.Delimiter}
	case t.colon:
		delims = []byte{' ', ',', ';', '\t'}
	case opt.Delimiter != 0:
		delims = []byte{opt.Delimiter}
	default:
		delims = []byte{',', ';'}
		tab, blank := false, false
		for _, l := range t.lines {
			tab = tab || bytes.IndexByte(l.text, '\t') >= 0
			blank = blank || bytes.IndexAny(l.text, " \t") >= 0
		}
		if tab {
			delims = append(delims, '\t')
		}
		if blank {
			delims = append(delims, ' ')
		}
	}
	anyComma := false
	for _, l := range t.lines {
		anyComma = anyComma || bytes.IndexByte(l.text, ',') >= 0
	}
	var out []reading
	for _, d := range delims {
		var commas []bool
		switch opt.DecimalComma {
		case "yes":
			commas = []bool{true}
		case "no":
			commas = []bool{false}
		default:
			commas = []bool{false}
			if d != ',' && anyComma {
				commas = append(commas, true)
			}
		}
		for _, comma := range commas {
			if comma && d == ',' {
				continue
			}
			var headers []bool
			switch {
			case t.colon:
				headers = []bool{false}
			case opt.Header == "yes":
				headers = []bool{true}
			case opt.Header == "no":
				headers = []bool{false}
			default:
				headers = []bool{true, false}
			}
			for _, h := range headers {
				shapes := []string{ShapeLong, ShapeLines, ShapeColumns, ShapeMatrix}
				if opt.Shape != "" {
					shapes = []string{opt.Shape}
				}
				for _, sh := range shapes {
					if t.colon && sh != ShapeLines {
						continue
					}
					var labels []bool
					switch sh {
					case ShapeLong:
						labels = []bool{true}
					case ShapeLines:
						labels = []bool{true, false}
						if t.colon {
							labels = []bool{true}
						}
					default:
						labels = []bool{h}
					}
					for _, lb := range labels {
						if (opt.Labels == "yes" && !lb) || (opt.Labels == "no" && lb) {
							continue
						}
						out = append(out, reading{delim: d, comma: comma, colon: t.colon, header: h, shape: sh, labels: lb, opt: &t.opt})
					}
				}
			}
		}
	}
	return out
}

// evaluate tries readings (time base and first index still open) on lines.
// It returns one result per full reading.
func evaluate(t *dischText, lines []dline, cands []reading, g Grid, tol float64) []result {
	type cut struct {
		cells [][][]byte
		fail  []*rfail
	}
	cuts := map[dialectKey]*cut{}
	var out []result
	seen := map[reading]bool{}
	for _, c := range cands {
		key := c
		key.base, key.first = "", 0
		if seen[key] {
			continue
		}
		seen[key] = true
		dk := dialectKey{c.delim, c.comma, c.colon}
		var src cellSource
		if len(lines) <= headLines {
			k := cuts[dk]
			if k == nil {
				k = &cut{cells: make([][][]byte, len(lines)), fail: make([]*rfail, len(lines))}
				for i, l := range lines {
					k.cells[i], k.fail[i] = cutLine(l, dk)
				}
				cuts[dk] = k
			}
			src = func(i int) ([][]byte, *rfail) { return k.cells[i], k.fail[i] }
		} else {
			src = func(i int) ([][]byte, *rfail) { return cutLine(lines[i], dk) }
		}
		s := build(lines, src, c, g)
		for _, r := range timeReadings(c, &s, t.opt) {
			res := result{r: r, headerOpen: s.base == ""}
			res.firstGuess = r.base == "samples" && r.first == 1 && r.shape != ShapeMatrix && t.opt.FirstIndex < 0 && s.first < 0
			if s.fail != nil {
				res.fail = s.fail
			} else {
				res.units, res.fail, res.soft, res.offGrid, res.worst, res.offDigits = place(&s, r, g, tol)
				// The structure's own weak preference (a header cell like
				// numbers) stays with the reading: alone, or over times out
				// of order (then it takes the weak tier too); two
				// discharges within 1 ms rule the reading out either way.
				switch {
				case s.soft == nil:
				case res.soft == nil:
					res.soft = s.soft
				case res.soft.unsorted:
					both := *res.soft
					both.weak = true
					res.soft = &both
				}
			}
			out = append(out, res)
		}
	}
	return out
}

// countFallback counts the readings that fit the text once the weak
// preferences are set aside.
func countFallback(all []result) int {
	n := 0
	for _, x := range all {
		if x.fail == nil && (x.soft == nil || x.soft.unsorted || x.soft.weak) {
			n++
		}
	}
	return n
}

// timeReadings completes a structural reading with the time bases and
// first indices left open by the options and the header.
func timeReadings(c reading, s *structure, opt DischargeOptions) []reading {
	var out []reading
	if c.shape == ShapeMatrix {
		c.base, c.first = "samples", 0
		return []reading{c}
	}
	bases := []string{"s", "ms", "samples"}
	switch {
	case opt.TimeBase != "":
		bases = []string{opt.TimeBase}
	case s.base != "":
		bases = []string{s.base}
	}
	for _, b := range bases {
		if b != "samples" {
			c.base, c.first = b, 0
			out = append(out, c)
			continue
		}
		firsts := []int{0, 1}
		switch {
		case opt.FirstIndex >= 0:
			firsts = []int{opt.FirstIndex}
		case s.first >= 0:
			firsts = []int{s.first}
		}
		for _, f := range firsts {
			c.base, c.first = b, f
			out = append(out, c)
		}
	}
	return out
}

// accept turns the chosen reading into Discharges with notes saying how it
// was read, why, and what was read and not stored.
func accept(t *dischText, c *result, all []result, multi bool, opt DischargeOptions, tol float64) *Discharges {
	r := c.r
	dc := &Discharges{File: t.path, Reading: r.describe(), Shape: r.shape, TimeBase: r.base, Labels: r.labels,
		FirstIndex: r.first, Units: c.units, OffGrid: c.offGrid, WorstOffGrid: c.worst,
		Delimiter: r.delim, DecimalComma: r.comma, Header: r.header}
	why := "as given"
	if multi {
		n := 0
		for _, x := range all {
			if x.fail == nil && x.soft == nil {
				n++
			}
		}
		switch {
		case n == 0:
			why = fmt.Sprintf("detected: every one of the %d readings that fit the text stores these values", countFallback(all))
		case n == 1:
			why = fmt.Sprintf("detected: the only one of %d readings that fits", len(all))
		default:
			why = fmt.Sprintf("detected: %d of %d readings fit and store the same values", n, len(all))
		}
	}
	dc.ShapeWhy, dc.TimeBaseWhy, dc.IndexWhy = why, why, why
	if !c.headerOpen && opt.TimeBase == "" {
		dc.TimeBaseWhy = "from the header"
	}
	dc.Notes = append(dc.Notes, "read as "+dc.Reading+" ("+why+")")
	if multi {
		dc.Notes = append(dc.Notes, ruledOut(c, all)...)
	}
	for _, m := range t.preamble {
		dc.Notes = append(dc.Notes, fmt.Sprintf("line %d %q read and not stored (muarc takes no settings from a discharge file)", m.Line, m.Key+": "+m.Value))
	}
	if t.comments > 0 {
		dc.Notes = append(dc.Notes, fmt.Sprintf("%d comment lines read and not stored", t.comments))
	}
	if c.soft != nil && c.soft.weak && !c.soft.unsorted {
		dc.Notes = append(dc.Notes, fmt.Sprintf("line %d: %s (read all the same: no other reading fits the text)", c.soft.line, c.soft.msg))
	} else if c.soft != nil {
		dc.Notes = append(dc.Notes, fmt.Sprintf("line %d: %s (kept; stored in ascending order)", c.soft.line, c.soft.msg))
	}
	if dc.OffGrid > 0 {
		dc.Notes = append(dc.Notes, fmt.Sprintf("%d times lie more than %g samples from the sample grid (worst %.3g samples); each was put on the nearest sample", dc.OffGrid, tol, dc.WorstOffGrid))
	}
	return dc
}

// lineText is the text of a table line by its number ("" when unknown).
func (t *dischText) lineText(n int) string {
	for _, l := range t.lines {
		if l.line == n {
			return clip(l.text)
		}
	}
	return ""
}
