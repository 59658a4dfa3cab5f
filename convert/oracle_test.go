package convert

import (
	"encoding/json"
	"fmt"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"muarc/internal/reftest"
)

// oracleCase is one generated discharge file: the reading options that are
// true for it (what the reference reader is told) and its true values.
type oracleCase struct {
	Path    string  `json:"path"`
	Shape   string  `json:"shape"`
	Colon   bool    `json:"colon"`
	Labels  bool    `json:"labels"`
	Header  bool    `json:"header"`
	Delim   string  `json:"delimiter"`
	Comma   bool    `json:"decimal_comma"`
	Base    string  `json:"time_base"`
	First   int     `json:"first_index"`
	Skip    int     `json:"skip_lines"`
	RateHz  float64 `json:"rate_hz"`
	StartS  float64 `json:"start_s"`
	Samples int     `json:"samples"`

	labels []string
	trains [][]int64
}

// genDischargeCase writes a random discharge export into dir: one of the
// four shapes (and the "label: times" form), with or without labels and a
// header, units in the header or not, in s, ms or 0- or 1-based samples,
// comma, semicolon, tab or blank delimited, decimal point or comma, quoted
// or not, with or without a BOM, CRLF and lines above the table. The true
// values are a property of the generator.
func genDischargeCase(rng *rand.Rand, dir string, i int) oracleCase {
	pickS := func(v ...string) string { return v[rng.Intn(len(v))] }
	c := oracleCase{Path: filepath.Join(dir, fmt.Sprintf("d%05d.txt", i)), First: 0}
	c.RateHz = []float64{1000, 2000, 2048, 4096, 5120}[rng.Intn(5)]
	c.Shape = pickS(ShapeLines, ShapeLines, ShapeColumns, ShapeLong, ShapeMatrix)
	if c.Shape == ShapeLines && rng.Intn(3) == 0 {
		c.Colon = true
	}
	if c.Shape == ShapeMatrix {
		c.Samples = 200 + rng.Intn(2000)
	} else {
		c.Samples = int(c.RateHz * (2 + rng.Float64()*28))
		if rng.Intn(5) == 0 {
			c.StartS = float64(rng.Intn(4)) * 0.25
		}
	}
	c.Delim = pickS(",", ";", "\t", " ")
	c.Comma = c.Delim != "," && rng.Intn(3) == 0
	c.Base = pickS("s", "ms", "samples")
	if c.Shape == ShapeMatrix {
		c.Base = "samples"
	}
	if c.Base == "samples" && c.Shape != ShapeMatrix {
		c.First = rng.Intn(2)
	}
	c.Labels = rng.Intn(3) > 0 || c.Shape == ShapeLong || c.Colon
	// Units and their discharges: sorted, at least 30 ms apart (a property
	// of our model).
	nu := 1 + rng.Intn(6)
	if c.Shape == ShapeMatrix {
		nu = 1 + rng.Intn(4)
	}
	maxLen := 0
	for u := 0; u < nu; u++ {
		n := 1 + rng.Intn(10)
		if c.Labels && c.Shape != ShapeLong && rng.Intn(12) == 0 {
			n = 0
		}
		var tr []int64
		k := int64(rng.Intn(c.Samples / 2))
		for len(tr) < n && k < int64(c.Samples) {
			tr = append(tr, k)
			k += int64((0.03 + rng.Float64()*0.2) * c.RateHz)
		}
		if len(tr) == 0 && !(c.Labels && c.Shape != ShapeLong) {
			tr = []int64{int64(rng.Intn(c.Samples))}
		}
		c.trains = append(c.trains, tr)
		maxLen = max(maxLen, len(tr))
	}
	quoteAll := rng.Intn(6) == 0 && c.Delim != " "
	c.labels = make([]string, nu)
	if c.Labels {
		kind := rng.Intn(7)
		perm := rng.Perm(98)
		for u := range c.labels {
			switch kind {
			case 0:
				c.labels[u] = strconv.Itoa(u + 1)
			case 1:
				c.labels[u] = strconv.Itoa(perm[u] + 1)
			case 2:
				c.labels[u] = fmt.Sprintf("MU%d", u+1)
			case 3:
				c.labels[u] = fmt.Sprintf("MU %d", perm[u])
			case 4:
				c.labels[u] = fmt.Sprintf("unit_%02d", u+1)
			case 5:
				c.labels[u] = fmt.Sprintf("%d.5", perm[u])
			default:
				c.labels[u] = fmt.Sprintf("mu-é%d", u)
			}
			if c.Colon {
				c.labels[u] = strings.ReplaceAll(c.labels[u], ":", "")
			}
		}
		if c.Comma {
			for u := range c.labels {
				c.labels[u] = strings.ReplaceAll(c.labels[u], ".", "-")
			}
		}
	}
	d := c.Delim
	hasMark := rng.Intn(2) == 0
	mark := map[string]string{"s": " [s]", "ms": " (ms)", "samples": fmt.Sprintf(" (%d-based)", c.First)}[c.Base]
	if !hasMark {
		mark = ""
	}
	cell := func(s string) string {
		if quoteAll || (strings.ContainsAny(s, d+"\"") && d != " ") || (d == " " && strings.Contains(s, " ")) {
			return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
		}
		return s
	}
	timeText := func(k int64) string {
		var s string
		switch c.Base {
		case "s":
			v := c.StartS + float64(k)/c.RateHz
			if rng.Intn(2) == 0 {
				s = strconv.FormatFloat(v, 'f', 6, 64)
			} else {
				s = strconv.FormatFloat(v, 'g', -1, 64)
			}
		case "ms":
			v := c.StartS*1000 + float64(k)*1000/c.RateHz
			if rng.Intn(2) == 0 {
				s = strconv.FormatFloat(v, 'f', 3, 64)
			} else {
				s = strconv.FormatFloat(v, 'g', -1, 64)
			}
		default:
			s = strconv.FormatInt(k+int64(c.First), 10)
		}
		if c.Comma {
			s = strings.ReplaceAll(s, ".", ",")
		}
		return cell(s)
	}
	join := func(cells []string) string {
		if d == " " {
			return strings.Join(cells, strings.Repeat(" ", 1+rng.Intn(2)))
		}
		return strings.Join(cells, d)
	}
	var lines []string
	if rng.Intn(3) == 0 {
		for j := rng.Intn(2); j >= 0; j-- {
			lines = append(lines, pickS("# discharge times, exported by hand", "% decomposition of grid A", fmt.Sprintf("sampling rate: %g Hz", c.RateHz)))
		}
		c.Skip = len(lines)
	}
	switch {
	case c.Colon:
		for u, tr := range c.trains {
			var ts []string
			for _, k := range tr {
				ts = append(ts, timeText(k))
			}
			l := c.labels[u] + ":"
			if len(ts) > 0 {
				l += " " + join(ts)
			}
			lines = append(lines, l)
		}
	case c.Shape == ShapeLines:
		c.Header = c.Labels && hasMark && rng.Intn(2) == 0
		if c.Header {
			h := []string{"unit"}
			for j := 0; j < max(maxLen, 1); j++ {
				h = append(h, cell(fmt.Sprintf("t%d%s", j+1, mark)))
			}
			lines = append(lines, join(h))
		}
		for u, tr := range c.trains {
			var row []string
			if c.Labels {
				row = append(row, cell(c.labels[u]))
			}
			for _, k := range tr {
				row = append(row, timeText(k))
			}
			lines = append(lines, join(row))
		}
	case c.Shape == ShapeLong:
		c.Header = rng.Intn(3) > 0
		if c.Header {
			lines = append(lines, join([]string{"unit", cell("time" + mark)}))
		}
		type ev struct {
			u     int
			k     int64
			label string
		}
		var evs []ev
		for u, tr := range c.trains {
			for _, k := range tr {
				evs = append(evs, ev{u, k, c.labels[u]})
			}
		}
		if rng.Intn(2) == 0 {
			// Interleaved in time; the units' order is then their first
			// discharge's order.
			slices.SortStableFunc(evs, func(a, b ev) int { return int(a.k - b.k) })
			var order []int
			seen := map[int]bool{}
			for _, e := range evs {
				if !seen[e.u] {
					seen[e.u] = true
					order = append(order, e.u)
				}
			}
			var l2 []string
			var t2 [][]int64
			for _, u := range order {
				l2, t2 = append(l2, c.labels[u]), append(t2, c.trains[u])
			}
			c.labels, c.trains = l2, t2
		}
		for _, e := range evs {
			lines = append(lines, join([]string{cell(e.label), timeText(e.k)}))
		}
	case c.Shape == ShapeColumns:
		c.Header = c.Labels
		if c.Header {
			var h []string
			for _, l := range c.labels {
				h = append(h, cell(l+mark))
			}
			lines = append(lines, join(h))
		}
		pad := ""
		if d == " " {
			pad = "NaN"
		}
		for r := 0; r < maxLen; r++ {
			var row []string
			for _, tr := range c.trains {
				if r < len(tr) {
					row = append(row, timeText(tr[r]))
				} else {
					row = append(row, pad)
				}
			}
			lines = append(lines, join(row))
		}
	case c.Shape == ShapeMatrix:
		c.Header = c.Labels
		if c.Header {
			var h []string
			for _, l := range c.labels {
				h = append(h, cell(l))
			}
			lines = append(lines, join(h))
		}
		pos := make([]int, nu)
		for r := 0; r < c.Samples; r++ {
			row := make([]string, nu)
			for u, tr := range c.trains {
				row[u] = "0"
				if pos[u] < len(tr) && tr[pos[u]] == int64(r) {
					row[u] = "1"
					pos[u]++
				}
			}
			lines = append(lines, join(row))
		}
	}
	eol := "\n"
	if rng.Intn(4) == 0 {
		eol = "\r\n"
	}
	text := strings.Join(lines, eol) + eol
	if rng.Intn(8) == 0 {
		text = "\xef\xbb\xbf" + text
	}
	if err := os.WriteFile(c.Path, []byte(text), 0o644); err != nil {
		panic(err)
	}
	if !c.Labels {
		c.labels = make([]string, len(c.trains))
	}
	return c
}

// options are the reading options that are true for c, all given.
func (c oracleCase) options() DischargeOptions {
	o := DischargeOptions{Shape: c.Shape, TimeBase: c.Base, FirstIndex: c.First}
	o.Delimiter = c.Delim[0]
	o.DecimalComma, o.Header = yesNo(c.Comma), yesNo(c.Header)
	if c.Shape == ShapeLines {
		o.Labels = yesNo(c.Labels)
	}
	if c.Base != "samples" {
		o.FirstIndex = -1
	}
	return o
}

func (c oracleCase) equal(labels []string, trains [][]int64) bool {
	if !slices.Equal(labels, c.labels) || len(trains) != len(c.trains) {
		return false
	}
	for i := range trains {
		if !slices.Equal(trains[i], c.trains[i]) && !(len(trains[i]) == 0 && len(c.trains[i]) == 0) {
			return false
		}
	}
	return true
}

func trainsOf(dc *Discharges) ([]string, [][]int64) {
	var l []string
	var t [][]int64
	for _, u := range dc.Units {
		l, t = append(l, u.Label), append(t, u.Discharges)
	}
	return l, t
}

// TestDischargeOracle is the differential oracle: generated discharge
// exports with their true values are read by a reference reader outside
// muarc (Python's csv module and numpy, Debian's /usr/bin/python3, told
// the true options) and by muarc twice: with the true options given, when
// it must store exactly the truth, and with every option detected, when it
// must store exactly the truth or refuse. Exiting with other values fails.
// MUARC_ORACLE_CASES sets the count (make fuzz runs more).
func TestDischargeOracle(t *testing.T) {
	py := reftest.NeedPython(t, "numpy")
	n := 2000
	if s := os.Getenv("MUARC_ORACLE_CASES"); s != "" {
		n, _ = strconv.Atoi(s)
	}
	seed := int64(20261201)
	if s := os.Getenv("MUARC_ORACLE_SEED"); s != "" {
		seed, _ = strconv.ParseInt(s, 10, 64)
	}
	dir := t.TempDir()
	rng := rand.New(rand.NewSource(seed))
	cases := make([]oracleCase, n)
	for i := range cases {
		cases[i] = genDischargeCase(rng, dir, i)
	}
	in, _ := json.Marshal(cases)
	cmd := exec.Command(py, filepath.Join("testdata", "discharge_reference.py"))
	cmd.Stdin = strings.NewReader(string(in))
	out, err := cmd.Output()
	if err != nil {
		if ee, ok := err.(*exec.ExitError); ok {
			t.Fatalf("reference reader: %v\n%s", err, ee.Stderr)
		}
		t.Fatalf("reference reader: %v", err)
	}
	var ref []struct {
		Labels []string  `json:"labels"`
		Trains [][]int64 `json:"trains"`
	}
	if err := json.Unmarshal(out, &ref); err != nil || len(ref) != n {
		t.Fatalf("reference output: %v (%d of %d)", err, len(ref), n)
	}
	refusedN, wrong, refusedBefore, wrongBefore := 0, 0, 0, 0
	byShape := map[string][2]int{}
	causes := map[string]int{}
	showCause, shown := os.Getenv("MUARC_ORACLE_SHOW"), 0
	defer func() { refusalTrace = nil }()
	for i, c := range cases {
		text, _ := os.ReadFile(c.Path)
		show := func() string { return fmt.Sprintf("case %d %+v\n%s", i, c, clip(text)) }
		if !c.equal(ref[i].Labels, ref[i].Trains) {
			t.Errorf("reference disagrees with the generator: %v %v\n%s", ref[i].Labels, ref[i].Trains, show())
			continue
		}
		g := Grid{RateHz: c.RateHz, StartS: c.StartS, Samples: c.Samples}
		dc, err := ReadDischarges(c.Path, g, c.options())
		if err != nil {
			t.Errorf("true options given: refused: %v\n%s", err, show())
		} else if l, tr := trainsOf(dc); !c.equal(l, tr) {
			t.Errorf("true options given: stored %q %v, true %q %v\n%s", l, tr, c.labels, c.trains, show())
		}
		key := c.Shape
		if c.Colon {
			key = "colon"
		}
		st := byShape[key]
		st[0]++
		// The refusal's cause is counted by shape, for the table below.
		refusalTrace = func(kind string, dims []string) {
			k := kind
			if len(dims) > 0 {
				d := slices.Clone(dims)
				slices.Sort(d)
				k += ": " + strings.Join(d, "+")
				for _, x := range d {
					causes["any shape | "+kind+" in "+x]++
				}
			}
			causes[key+" | "+k]++
		}
		var cause string
		prevTrace := refusalTrace
		traceNow := func(kind string, dims []string) {
			d := slices.Clone(dims)
			slices.Sort(d)
			cause = key + " | " + kind + ": " + strings.Join(d, "+")
			prevTrace(kind, dims)
		}
		// The same file without the weak rules yielding: the refusal rate
		// before that change, in the same run.
		weakRulesYield, refusalTrace = false, nil
		if dcb, err := ReadDischarges(c.Path, g, DischargeOptions{FirstIndex: -1}); err != nil {
			refusedBefore++
		} else if l, tr := trainsOf(dcb); !c.equal(l, tr) {
			wrongBefore++
		}
		weakRulesYield, refusalTrace = true, traceNow
		dc, err = ReadDischarges(c.Path, g, DischargeOptions{FirstIndex: -1})
		if err != nil && showCause != "" && strings.Contains(cause, showCause) && shown < 12 {
			shown++
			t.Logf("REFUSED (%s) %+v\n%.300s\n%v", cause, c, text, err)
		}
		if err != nil {
			if AsParseError(err) == nil {
				t.Errorf("detected: not a ParseError (exit 2): %v", err)
			}
			refusedN++
			st[1]++
		} else if l, tr := trainsOf(dc); !c.equal(l, tr) {
			wrong++
			t.Errorf("detected: stored %q %v, true %q %v (%s)\n%s", l, tr, c.labels, c.trains, dc.Reading, show())
		}
		byShape[key] = st
		if wrong > 20 {
			t.Fatal("too many")
		}
	}
	t.Logf("%d cases: %d read exactly with every option detected, %d refused (%.1f %%), %d stored different values; the same files with the reader before the digits and weak-rule changes: %d refused (%.1f %%), %d stored different values",
		n, n-refusedN-wrong, refusedN, 100*float64(refusedN)/float64(n), wrong, refusedBefore, 100*float64(refusedBefore)/float64(n), wrongBefore)
	for k, v := range byShape {
		t.Logf("  %s: %d cases, %d refused", k, v[0], v[1])
	}
	keys := make([]string, 0, len(causes))
	for k := range causes {
		keys = append(keys, k)
	}
	slices.SortFunc(keys, func(a, b string) int { return causes[b] - causes[a] })
	for _, k := range keys {
		t.Logf("  refused %4d  %s", causes[k], k)
	}
}
