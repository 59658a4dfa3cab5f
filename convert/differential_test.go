package convert

import (
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"muarc/record"
)

// A differential test of the signal and unit-table readers: a generator
// writes small files across dialects (comma, semicolon, tab, blanks;
// decimal comma; quoting; header or not; units in headers; a time column
// in s or ms or none; BOM; CRLF; preamble lines) and Python's csv module
// with numpy reads each with the dialect it was written in
// (testdata/reference_reader.py, one process for the whole batch). muarc,
// detecting the dialect itself, must give exactly the reference's values
// or refuse with a ParseError (exit 2 in the command); accepting with
// different values fails. The seeds run in make test; DIFF_CASES raises the
// count (make fuzz).

type diffCase struct {
	Path         string `json:"path"`
	Delim        string `json:"delim"`
	DecimalComma bool   `json:"decimal_comma"`
	Skip         int    `json:"skip"`
	Header       bool   `json:"header"`
	TimeCol      int    `json:"time_col"`
	TextCols     []int  `json:"text_cols"`
	unitTable    bool
	rate         float64
	desc         string
}

type diffResult struct {
	Error   string     `json:"error"`
	Labels  []string   `json:"labels"`
	Columns [][]string `json:"columns"`
}

var diffDelims = []string{",", ";", "\t", " "}

// genNumber writes a number as a lab's export might: digits, sign,
// exponent, decimal comma, sometimes quoted, sometimes empty or NaN.
func genNumber(rng *rand.Rand, comma bool, delim string) string {
	var s string
	switch rng.Intn(10) {
	case 0:
		s = strconv.Itoa(rng.Intn(2000) - 1000)
	case 1:
		s = strconv.FormatFloat(rng.NormFloat64()*1e3, 'e', rng.Intn(8), 64)
	case 2:
		s = strconv.FormatFloat(rng.NormFloat64(), 'f', rng.Intn(18), 64)
	case 3:
		if delim != " " {
			return ""
		}
		s = "NaN"
	default:
		s = strconv.FormatFloat(rng.NormFloat64()*100, 'f', rng.Intn(7), 64)
	}
	if comma {
		s = strings.Replace(s, ".", ",", 1)
	}
	return s
}

func quoteCell(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

var diffTexts = []string{`box 3 said "ok" twice`, "two\nlines", "a,b;c", "tab\there", "  spaced  ", "Müller–Åsa", "x", "note: fine", "#hash inside", "a b"}

func genCase(rng *rand.Rand, dir string, i int) diffCase {
	c := diffCase{Delim: diffDelims[rng.Intn(4)], TimeCol: -1}
	c.DecimalComma = c.Delim != "," && rng.Intn(3) == 0
	c.unitTable = rng.Intn(3) == 0
	eol := "\n"
	if rng.Intn(3) == 0 {
		eol = "\r\n"
	}
	var b strings.Builder
	if rng.Intn(4) == 0 {
		b.WriteString("\ufeff")
	}
	c.rate = []float64{100, 512, 1000, 2048}[rng.Intn(4)]
	if rng.Intn(2) == 0 {
		fmt.Fprintf(&b, "subject: S%02d%s", rng.Intn(20), eol)
		c.Skip++
	}
	if !c.unitTable {
		fmt.Fprintf(&b, "sampling rate: %g Hz%s", c.rate, eol)
		c.Skip++
	}
	if rng.Intn(3) == 0 {
		b.WriteString("# exported for a test" + eol)
		c.Skip++
	}
	d := c.Delim
	rows := 3 + rng.Intn(20)
	if c.unitTable {
		c.Header = true
		quoteAll := rng.Intn(4) == 0 && d != " "
		head := []string{"unit", "silhouette", "pnr [dB]", "comment", "score"}
		if d == " " {
			head[2] = "pnr[dB]"
		}
		c.TextCols = []int{0, 3}
		for j, h := range head {
			if j > 0 {
				b.WriteString(d)
			}
			if quoteAll {
				h = quoteCell(h)
			}
			b.WriteString(h)
		}
		b.WriteString(eol)
		for r := 0; r < rows; r++ {
			cells := []string{strconv.Itoa(r + 1), genNumber(rng, c.DecimalComma, d), genNumber(rng, c.DecimalComma, d), diffTexts[rng.Intn(len(diffTexts))], genNumber(rng, c.DecimalComma, d)}
			for j, v := range cells {
				switch {
				case j == 3 && (quoteAll || rng.Intn(2) == 0 || strings.ContainsAny(v, d+"\"\n\t #") || v != strings.TrimSpace(v)):
					v = quoteCell(v)
				case j == 3 && d == " ":
					v = quoteCell(v)
				case quoteAll:
					v = quoteCell(v)
				}
				if j > 0 {
					b.WriteString(d)
				}
				b.WriteString(v)
			}
			b.WriteString(eol)
		}
		c.desc = fmt.Sprintf("unit table %q comma=%v", d, c.DecimalComma)
	} else {
		cols := 1 + rng.Intn(4)
		timeKind := rng.Intn(3) // 0 none, 1 s, 2 ms
		c.Header = timeKind > 0 || rng.Intn(3) > 0
		if timeKind > 0 {
			c.TimeCol = 0
		}
		if c.Header {
			var head []string
			switch timeKind {
			case 1:
				head = append(head, "time [s]")
			case 2:
				head = append(head, "time [ms]")
			}
			for j := 0; j < cols; j++ {
				h := fmt.Sprintf("c%d", j+1)
				if rng.Intn(2) == 0 {
					h += " [uV]"
				}
				head = append(head, h)
			}
			if d == " " {
				for j := range head {
					head[j] = strings.ReplaceAll(head[j], " ", "_")
				}
			}
			b.WriteString(strings.Join(head, d) + eol)
		}
		for r := 0; r < rows; r++ {
			var cells []string
			switch timeKind {
			case 1:
				cells = append(cells, strconv.FormatFloat(float64(r)/c.rate, 'f', 6, 64))
			case 2:
				cells = append(cells, strconv.FormatFloat(1000*float64(r)/c.rate, 'f', 3, 64))
			}
			for j := 0; j < cols; j++ {
				v := genNumber(rng, c.DecimalComma, d)
				if v == "" && d == " " {
					v = "NaN"
				}
				if v != "" && d != " " && rng.Intn(8) == 0 {
					v = quoteCell(v)
				}
				cells = append(cells, v)
			}
			for j := range cells {
				if c.DecimalComma && j == 0 && timeKind > 0 {
					cells[j] = strings.Replace(cells[j], ".", ",", 1)
				}
			}
			b.WriteString(strings.Join(cells, d) + eol)
		}
		c.desc = fmt.Sprintf("signals %q comma=%v header=%v time=%d", d, c.DecimalComma, c.Header, timeKind)
	}
	c.Path = filepath.Join(dir, fmt.Sprintf("case%04d.txt", i))
	if err := os.WriteFile(c.Path, []byte(b.String()), 0o644); err != nil {
		panic(err)
	}
	return c
}

func bitsHex(v float64) string {
	if math.IsNaN(v) {
		return "NaN"
	}
	var b [8]byte
	u := math.Float64bits(v)
	for i := 7; i >= 0; i-- {
		b[i] = byte(u)
		u >>= 8
	}
	return hex.EncodeToString(b[:])
}

// muarcRead reads a case as the importer would, detecting the dialect.
func muarcRead(c diffCase) (*diffResult, error) {
	if c.unitTable {
		ut, err := ReadUnitTable(c.Path, UnitTableOptions{})
		if err != nil {
			return nil, err
		}
		r := &diffResult{}
		ids := make([]string, len(ut.Units))
		for i, u := range ut.Units {
			ids[i] = strconv.FormatInt(u.ID, 10)
		}
		r.Columns = append(r.Columns, ids)
		for _, f := range []string{FieldSilhouette, FieldPNR} {
			var col []string
			for i := range ut.Units {
				col = append(col, bitsHex(getField(&ut.Units[i], f)))
			}
			r.Columns = append(r.Columns, col)
		}
		for _, e := range ut.Extra {
			var col []string
			for i := range ut.Units {
				if e.Text != nil {
					col = append(col, e.Text[i])
				} else {
					col = append(col, bitsHex(e.Values[i]))
				}
			}
			r.Columns = append(r.Columns, col)
		}
		return r, nil
	}
	s, err := ScanSignals(c.Path, SignalOptions{DType: record.Float64})
	if err != nil {
		return nil, err
	}
	if s.RateHz != c.rate {
		return nil, fmt.Errorf("rate %v, written %v (%s)", s.RateHz, c.rate, s.RateWhy)
	}
	cols, err := s.Columns()
	if err != nil {
		return nil, err
	}
	r := &diffResult{}
	if s.lay.header != nil {
		r.Labels = s.Labels
	}
	for _, col := range cols {
		var h []string
		for _, v := range col {
			h = append(h, bitsHex(v))
		}
		r.Columns = append(r.Columns, h)
	}
	return r, nil
}

func TestDifferentialAgainstPythonCSV(t *testing.T) {
	py := needPython(t)
	n := 1000
	if v, err := strconv.Atoi(os.Getenv("DIFF_CASES")); err == nil && v > 0 {
		n = v
	}
	rng := rand.New(rand.NewSource(20261201))
	dir := t.TempDir()
	cases := make([]diffCase, n)
	for i := range cases {
		cases[i] = genCase(rng, dir, i)
	}
	in, _ := json.Marshal(cases)
	cmd := exec.Command(py, "testdata/reference_reader.py")
	cmd.Stdin = strings.NewReader(string(in))
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("reference reader: %v", err)
	}
	var ref []diffResult
	if err := json.Unmarshal(out, &ref); err != nil || len(ref) != n {
		t.Fatalf("reference output: %v (%d results)", err, len(ref))
	}
	agreed, refused := 0, 0
	for i, c := range cases {
		got, err := muarcRead(c)
		if err != nil {
			if AsParseError(err) == nil && !strings.HasPrefix(err.Error(), "rate ") {
				t.Errorf("case %d (%s): refused without a place: %v", i, c.desc, err)
			}
			if strings.HasPrefix(err.Error(), "rate ") {
				t.Errorf("case %d (%s): accepted with another %v", i, c.desc, err)
			}
			refused++
			if os.Getenv("DIFF_VERBOSE") != "" {
				b, _ := os.ReadFile(c.Path)
				t.Logf("case %d (%s) refused: %v\n%s", i, c.desc, err, b)
			}
			continue
		}
		want := ref[i]
		if want.Error != "" {
			t.Errorf("case %d (%s): the reference refuses (%s) but muarc read it", i, c.desc, want.Error)
			continue
		}
		if fmt.Sprint(got.Columns) != fmt.Sprint(want.Columns) || len(got.Labels) > 0 && fmt.Sprint(got.Labels) != fmt.Sprint(want.Labels) {
			b, _ := os.ReadFile(c.Path)
			t.Errorf("case %d (%s): muarc read other values\nmuarc %q %q\nref   %q %q\nfile:\n%s", i, c.desc, got.Labels, got.Columns, want.Labels, want.Columns, b)
			continue
		}
		agreed++
	}
	t.Logf("%d cases: %d read the same as Python's csv and numpy, %d refused with their place", n, agreed, refused)
	if agreed < n/2 {
		t.Errorf("only %d of %d cases read: the generator or the reader is off", agreed, n)
	}
}
