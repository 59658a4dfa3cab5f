package convert

import (
	"bufio"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"muarc/record"
)

// MUAP templates and the history as text, so that an export imported again
// gives the same recording: one row per unit and channel with a column per
// lag, and one row per step of the history with every cell quoted
// (RFC 4180), the details JSON text as written.

// unitKey is how a unit is named in the MUAP file: as in the discharge
// file written beside it (its label, or its id when it has none).
func unitKey(u *record.Unit) string { return u.Name() }

func writeMUAPs(w *bufio.Writer, a *record.Array, d *record.Decomposition, delim byte) error {
	m := d.MUAPs
	if m.Units != len(d.Units) || m.Channels != len(a.Channels) {
		return fmt.Errorf("decomposition %s: MUAP templates for %d units x %d channels, the decomposition has %d units and the array %d channels", d.Name, m.Units, m.Channels, len(d.Units), len(a.Channels))
	}
	header(w, "values", "MUAP templates in "+orNone(m.Unit)+", one row per unit and channel, a column per lag in samples from the discharge")
	w.WriteString("unit" + string(delim) + "channel")
	for l := 0; l < m.Lags; l++ {
		w.WriteString(string(delim) + "lag " + strconv.Itoa(m.FirstLag+l) + bracketUnit(m.Unit))
	}
	w.WriteByte('\n')
	var b []byte
	for u := 0; u < m.Units; u++ {
		for c := 0; c < m.Channels; c++ {
			b = appendQuoted(b[:0], unitKey(&d.Units[u]))
			b = append(b, delim)
			b = appendQuoted(b, a.Channels[c].Label)
			for l := 0; l < m.Lags; l++ {
				b = append(b, delim)
				b = appendF32(b, m.At(u, c, l))
			}
			b = append(b, '\n')
			w.Write(b)
		}
	}
	return nil
}

func orNone(u string) string {
	if u == "" {
		return "no unit"
	}
	return u
}

func bracketUnit(u string) string {
	if u == "" {
		return ""
	}
	return " [" + u + "]"
}

// readMUAPs reads a MUAP file written by writeMUAPs (or by hand in that
// form) for decomposition d of array a: every unit and channel once, in
// any order, the same lags on every row.
func readMUAPs(path string, a *record.Array, d *record.Decomposition, opt TextOptions) (*record.MUAPs, error) {
	opt.Header = "yes"
	lay, err := readLayout(path, opt)
	if err != nil {
		return nil, err
	}
	h := lay.header
	if len(h) < 3 || !strings.EqualFold(h[0], "unit") || !strings.EqualFold(h[1], "channel") {
		return nil, perr(path, lay.headerLine, 1, "the header is unit, channel, then one column per lag: \"lag -25 [uV]\", \"lag -24 [uV]\", ...", "not a MUAP template table")
	}
	m := &record.MUAPs{Units: len(d.Units), Channels: len(a.Channels), Lags: len(h) - 2}
	for i, c := range h[2:] {
		label, unit, _ := splitLabelUnit(c)
		lag, err := strconv.Atoi(strings.TrimSpace(strings.TrimPrefix(label, "lag")))
		if err != nil || i > 0 && lag != m.FirstLag+i {
			return nil, perr(path, lay.headerLine, i+3, "name the lag columns \"lag N\" with N the samples from the discharge, one apart", "column %q is not the next lag", c)
		}
		if i == 0 {
			m.FirstLag, m.Unit = lag, unit
		} else if unit != m.Unit {
			return nil, perr(path, lay.headerLine, i+3, "give every lag column the same unit", "unit %q differs from %q", unit, m.Unit)
		}
	}
	if m.Unit == "" {
		m.Unit = a.Unit
	}
	unitRow := map[string]int{}
	for i := range d.Units {
		unitRow[unitKey(&d.Units[i])] = i
	}
	chanCol := map[string]int{}
	for i, c := range a.Channels {
		chanCol[c.Label] = i
	}
	m.Data = make([]float32, m.Units*m.Channels*m.Lags)
	seen := make([]int, m.Units*m.Channels)
	rows, err := readRows(lay)
	if err != nil {
		return nil, err
	}
	for _, r := range rows {
		if len(r.cells) != len(h) {
			return nil, perr(path, r.line, min(len(r.cells), len(h))+1, "every row needs as many cells as the header", "row has %d cells, expected %d", len(r.cells), len(h))
		}
		u, ok := unitRow[string(r.cells[0])]
		if !ok {
			return nil, perr(path, r.line, 1, "give templates only for units of the discharge file", "no unit %q in decomposition %s", r.cells[0], d.Name)
		}
		c, ok := chanCol[string(r.raw[1])]
		if !ok {
			return nil, perr(path, r.line, 2, "give templates only for channels of the array", "no channel %q in array %s", r.raw[1], a.Name)
		}
		if l := seen[u*m.Channels+c]; l > 0 {
			return nil, perr(path, r.line, 1, "give each unit and channel once", "unit %q channel %q again (first on line %d)", r.cells[0], r.raw[1], l)
		}
		seen[u*m.Channels+c] = r.line
		for l, cell := range r.cells[2:] {
			n, kind := parseNumber(cell, lay.dialect.DecimalComma)
			switch {
			case kind == cellText:
				return nil, perr(path, r.line, l+3, "write a number, or NaN", "text %q in a template cell", clip(cell))
			case n.rng != rangeOK:
				return nil, perr(path, r.line, l+3, hintOutOfRange, "%q is %s", clip(cell), n.rng)
			case kind != cellNumber:
				m.Data[(u*m.Channels+c)*m.Lags+l] = float32(math.NaN())
			default:
				m.Data[(u*m.Channels+c)*m.Lags+l] = toF32(&n, cell, lay.dialect.DecimalComma)
			}
		}
	}
	for i, l := range seen {
		if l == 0 {
			return nil, perr(path, 0, 0, "give a row for every unit and channel", "no template for unit %s channel %q", unitKey(&d.Units[i/m.Channels]), a.Channels[i%m.Channels].Label)
		}
	}
	return m, nil
}

func writeHistory(w *bufio.Writer, h []record.Operation, delim byte) error {
	w.WriteString("action" + string(delim) + "software" + string(delim) + "time" + string(delim) + "details\n")
	var b []byte
	for _, op := range h {
		b = appendQuoted(b[:0], op.Action)
		b = append(b, delim)
		b = appendQuoted(b, op.Software)
		b = append(b, delim)
		b = appendQuoted(b, op.Time.UTC().Format(time.RFC3339Nano))
		b = append(b, delim)
		b = appendQuoted(b, op.Details)
		b = append(b, '\n')
		w.Write(b)
	}
	return nil
}

// ReadHistory reads a history table (action, software, time, details; the
// time in RFC 3339) as muarc export writes it.
func ReadHistory(path string) ([]record.Operation, error) {
	lay, err := readLayout(path, TextOptions{Header: "yes"})
	if err != nil {
		return nil, err
	}
	want := []string{"action", "software", "time", "details"}
	if len(lay.header) != 4 || !equalFold(lay.header, want) {
		return nil, perr(path, lay.headerLine, 1, "the header is action, software, time, details", "not a history table")
	}
	rows, err := readRows(lay)
	if err != nil {
		return nil, err
	}
	var out []record.Operation
	for _, r := range rows {
		if len(r.cells) != 4 {
			return nil, perr(path, r.line, min(len(r.cells), 4)+1, "every row needs action, software, time and details", "row has %d cells", len(r.cells))
		}
		t, err := time.Parse(time.RFC3339Nano, string(r.cells[2]))
		if err != nil {
			return nil, perr(path, r.line, 3, "write the time in RFC 3339, e.g. 2026-03-14T09:30:00Z", "time %q not readable", clip(r.cells[2]))
		}
		out = append(out, record.Operation{Action: string(r.raw[0]), Software: string(r.raw[1]), Time: t, Details: string(r.raw[3])})
	}
	return out, nil
}

func equalFold(a, b []string) bool {
	for i := range a {
		if !strings.EqualFold(strings.TrimSpace(a[i]), b[i]) {
			return false
		}
	}
	return true
}

func (pl *Plan) muaps(it input, prof *Profile) error {
	a, err := pl.arrayOf(it)
	if err != nil {
		return err
	}
	var d *record.Decomposition
	for i := range a.Decompositions {
		if a.Decompositions[i].Name == it.dc && len(a.Decompositions[i].Units) > 0 {
			d = &a.Decompositions[i]
		}
	}
	if d == nil {
		return perr(it.path, 0, 0, "give the decomposition's discharge file too (--discharges)", "no units in decomposition %q of array %q for these MUAP templates", it.dc, a.Name)
	}
	m, err := readMUAPs(it.path, a, d, TextOptions{})
	if err != nil {
		return err
	}
	d.MUAPs = m
	pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "muaps", Trial: it.trial, Array: a.Name, Decomposition: d.Name,
		Units: m.Units, Channels: m.Channels, Notes: []string{fmt.Sprintf("%d lags from %d samples", m.Lags, m.FirstLag)}})
	return nil
}
