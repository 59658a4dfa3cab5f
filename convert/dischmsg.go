package convert

import (
	"fmt"
	"slices"
	"sort"
	"strings"
)

// The messages of the discharge reader: what ruled readings out, and the
// refusals that name the readings and the options that pick each.

// ruledOut names, for each option that detection chose, the nearest
// reading that differs in it and why that one does not fit.
func ruledOut(c *result, all []result) []string {
	var out []string
	done := map[string]bool{}
	for _, x := range all {
		d := diffDims(c.r, x.r)
		if len(d) != 1 || done[d[0]] {
			continue
		}
		f := x.fail
		if f == nil {
			f = x.soft
		}
		if f == nil {
			continue
		}
		done[d[0]] = true
		where := ""
		if f.line > 0 {
			where = fmt.Sprintf(" (line %d)", f.line)
		}
		out = append(out, fmt.Sprintf("not %s: %s%s", dimValue(x.r, d[0]), f.msg, where))
	}
	return out
}

// diffDims lists the options in which two readings differ.
func diffDims(a, b reading) []string {
	var d []string
	if a.delim != b.delim {
		d = append(d, "delimiter")
	}
	if a.comma != b.comma {
		d = append(d, "decimal_comma")
	}
	if a.header != b.header {
		d = append(d, "header")
	}
	if a.shape != b.shape {
		d = append(d, "shape")
	}
	if a.labels != b.labels {
		d = append(d, "labels")
	}
	if a.base != b.base {
		d = append(d, "time_base")
	}
	if a.base == "samples" && b.base == "samples" && a.first != b.first {
		d = append(d, "first_index")
	}
	return d
}

func dimValue(r reading, dim string) string {
	switch dim {
	case "delimiter":
		return DelimiterName(r.delim) + "-delimited"
	case "decimal_comma":
		return "decimal comma " + yesNo(r.comma)
	case "header":
		return "header " + yesNo(r.header)
	case "shape":
		return "shape " + r.shape
	case "labels":
		return "labels " + yesNo(r.labels)
	case "time_base":
		return "times in " + r.base
	}
	if r.base != "samples" || r.shape == ShapeMatrix {
		return "no sample index"
	}
	return fmt.Sprintf("%d-based", r.first)
}

// noReading is the error when no reading fits: the failure of the reading
// that got furthest into the file.
func noReading(t *dischText, res []result, opt DischargeOptions) error {
	best := -1
	// A reading ruled out only by a soft rule came closest; then the one
	// that failed furthest into the file.
	score := func(r *result) int {
		f := r.fail
		s := 0
		if f == nil {
			f, s = r.soft, 1<<40
		}
		return s + f.line<<10 + f.col
	}
	for i := range res {
		if best < 0 || score(&res[i]) > score(&res[best]) {
			best = i
		}
	}
	r := &res[best]
	f := r.fail
	if f == nil {
		f = r.soft
	}
	pe := &ParseError{File: t.path, Line: f.line, Column: f.col, Msg: f.msg, Hint: f.hint, Example: t.lineText(f.line)}
	if len(res) > 1 {
		cli, prof := r.r.flags(opt)
		pe.Msg = fmt.Sprintf("no reading of the file fits (%d tried); read as %s: %s", len(res), r.r.describe(), f.msg)
		h := f.hint
		if h != "" {
			h += "; "
		}
		pe.Hint = h + "if that is the reading, give " + cli + " (profile: " + prof + ") and see what remains"
	}
	return pe
}

// ambiguous is the error when readings that fit store different values.
func ambiguous(t *dischText, groups [][]*result, opt DischargeOptions) error {
	// Readings no rule speaks against first; those a weak preference
	// (every unit with at most one discharge, a header cell like numbers)
	// speaks against after them.
	weak := func(g []*result) bool {
		for _, r := range g {
			if r.soft == nil {
				return false
			}
		}
		return true
	}
	groups = slices.Clone(groups)
	sort.SliceStable(groups, func(a, b int) bool { return !weak(groups[a]) && weak(groups[b]) })
	if len(groups) > 4 {
		groups = groups[:4]
	}
	dims := separating(groups)
	var ways, picks, choices []string
	for i, g := range groups {
		r := g[0]
		n := 0
		for _, u := range r.units {
			n += len(u.Discharges)
		}
		first := ""
		if len(r.units) > 0 {
			u := r.units[0]
			first = fmt.Sprintf("; the first unit %s has %d discharges", unitName(u.Label, 0), len(u.Discharges))
			if len(u.Discharges) > 0 {
				first += fmt.Sprintf(" from sample %d", u.Discharges[0])
			}
		}
		ways = append(ways, fmt.Sprintf("(%d) %s: %d units, %d discharges%s", i+1, r.r.describe(), len(r.units), n, first))
		cli, prof := pick(r.r, dims, opt)
		picks = append(picks, fmt.Sprintf("(%d) %s [profile: %s]", i+1, cli, prof))
		choices = append(choices, cli)
	}
	// The first row every shown reading reads as data.
	line := t.lines[0]
	headers := true
	for _, g := range groups {
		headers = headers && g[0].r.header
	}
	if headers && len(t.lines) > 1 {
		line = t.lines[1]
	}
	return &ParseError{File: t.path, Line: line.line, Column: 1,
		Msg:     fmt.Sprintf("the file can be read in %d ways that store different values: %s", len(groups), strings.Join(ways, "; ")),
		Hint:    "muarc does not guess: pick one with " + strings.Join(picks, " or "),
		Example: string(line.text), Choices: choices}
}

// separating picks few options whose values tell every two groups apart
// (greedy: the option that separates most pairs first).
func separating(groups [][]*result) []string {
	all := []string{"shape", "labels", "time_base", "first_index", "header", "delimiter", "decimal_comma"}
	vals := func(g []*result, d string) map[string]bool {
		m := map[string]bool{}
		for _, r := range g {
			m[dimValue(r.r, d)] = true
		}
		return m
	}
	apart := func(a, b []*result, d string) bool {
		va, vb := vals(a, d), vals(b, d)
		for v := range va {
			if vb[v] {
				return false
			}
		}
		return true
	}
	type pair struct{ a, b int }
	var open []pair
	for a := range groups {
		for b := a + 1; b < len(groups); b++ {
			open = append(open, pair{a, b})
		}
	}
	var out []string
	for len(open) > 0 {
		best, bestN := "", 0
		for _, d := range all {
			n := 0
			for _, p := range open {
				if apart(groups[p.a], groups[p.b], d) {
					n++
				}
			}
			if n > bestN {
				best, bestN = d, n
			}
		}
		if best == "" {
			return all
		}
		out = append(out, best)
		var rest []pair
		for _, p := range open {
			if !apart(groups[p.a], groups[p.b], best) {
				rest = append(rest, p)
			}
		}
		open = rest
	}
	return out
}

// pick names the options in dims that select reading r, as flags and as
// profile members.
func pick(r reading, dims []string, opt DischargeOptions) (string, string) {
	var cli, prof []string
	seen := map[string]bool{}
	add := func(flag, member, v string) {
		if seen[flag] {
			return
		}
		seen[flag] = true
		cli = append(cli, "--"+flag+" "+v)
		prof = append(prof, "discharges."+member+": "+v)
	}
	for _, d := range dims {
		switch {
		case d == "shape":
			add("shape", "shape", r.shape)
		case d == "labels":
			add("labels", "labels", yesNo(r.labels))
		case d == "header":
			if !r.colon {
				add("discharge-header", "header", yesNo(r.header))
			}
		case (d == "time_base" || d == "first_index") && r.shape != ShapeMatrix:
			add("time-base", "time_base", r.base)
			if r.base == "samples" && d == "first_index" {
				add("first-index", "first_index", fmt.Sprint(r.first))
			}
		case d == "delimiter" && !r.colon:
			add("discharge-delimiter", "delimiter", DelimiterName(r.delim))
		case d == "decimal_comma":
			add("discharge-decimal-comma", "decimal_comma", yesNo(r.comma))
		}
	}
	if len(cli) == 0 {
		return r.flags(opt)
	}
	return strings.Join(cli, " "), strings.Join(prof, ", ")
}

// firstIndexGuess refuses a file that fits only as 1-based sample indices
// when nothing said so: usually one index equal to the sample count.
func firstIndexGuess(t *dischText, res []result, c *result, opt DischargeOptions) error {
	var zero *result
	for i := range res {
		x := &res[i]
		if d := diffDims(c.r, x.r); len(d) == 1 && d[0] == "first_index" {
			zero = x
		}
	}
	pe := &ParseError{File: t.path, Msg: "the sample indices fit only when counted from 1, and nothing in the file says they are",
		Hint: "give --first-index 1 (profile: discharges.first_index: 1) if the file counts samples from 1, or mark the header \"(1-based)\"; else correct the index"}
	if zero != nil {
		f := zero.fail
		if f == nil {
			f = zero.soft
		}
		if f != nil {
			pe.Line, pe.Column, pe.Example = f.line, f.col, t.lineText(f.line)
			pe.Msg += "; counted from 0: " + f.msg
		}
	}
	return pe
}
