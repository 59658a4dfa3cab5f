package convert

import (
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"muarc/record"
)

const td = "../testdata/convert/"

func writeTemp(t testing.TB, name, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestSemicolonDecimalCommaBOMCRLF(t *testing.T) {
	s, err := ScanSignals(td+"emg_semicolon_comma.csv", SignalOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if s.Dialect.Delimiter != ';' || !s.Dialect.DecimalComma || !s.Dialect.Header || !s.Dialect.Detected {
		t.Fatalf("dialect %+v", s.Dialect)
	}
	if !strings.Contains(s.Dialect.Why, "semicolon detected") || !strings.Contains(s.Dialect.Why, "decimal comma") {
		t.Errorf("why: %s", s.Dialect.Why)
	}
	if got := strings.Join(s.Labels, "|"); got != "EMG 1|EMG 2" {
		t.Errorf("labels %q", got)
	}
	// The micro sign and "u" both give UCUM "uV" (UCUM: "u" is the micro prefix).
	if s.Units[0] != "uV" || s.Units[1] != "uV" {
		t.Errorf("units %q", s.Units)
	}
	if s.RateHz != 2048 || !strings.Contains(s.RateWhy, "line") {
		t.Errorf("rate %v (%s)", s.RateHz, s.RateWhy)
	}
	if err := s.Decide(); err != nil {
		t.Fatal(err)
	}
	if s.Rows != 4 || s.Samples != 4 || s.NaNCells != 2 {
		t.Errorf("rows %d samples %d nan %d", s.Rows, s.Samples, s.NaNCells)
	}
	if s.DType != record.Float32 {
		t.Errorf("dtype %s: %s", s.DType, s.DTypeWhy)
	}
	if ex := MetaExtra(s.Meta); ex["subject"] != "S01" || len(ex) != 1 {
		t.Errorf("meta %v", ex)
	}
	cols, err := s.Columns()
	if err != nil {
		t.Fatal(err)
	}
	want0 := []float64{1.25, 2.5, math.NaN(), 7.125}
	want1 := []float64{-3.5, math.NaN(), 4, -0.5}
	for i := range want0 {
		if !same(cols[0][i], want0[i]) || !same(cols[1][i], want1[i]) {
			t.Fatalf("row %d: %v %v", i, cols[0][i], cols[1][i])
		}
	}
	// 0.000488 s against the 2048 Hz grid (1/2048 = 0.00048828125 s exactly).
	if j := s.JitterS; math.Abs(j-(0.000977-2.0/2048)) > 1e-12 {
		t.Errorf("jitter %g", j)
	}
}

func same(a, b float64) bool { return a == b || math.IsNaN(a) && math.IsNaN(b) }

func TestForceMillisecondsRateDerived(t *testing.T) {
	// Four rows 0.5 ms apart written to 0.1 ms: every rate from 1936 to
	// 2068 Hz puts row 3 (1.5 ms) within 0.05 ms of 3000/r ms (worked by
	// hand: 3000/1.55 = 1935.5, 3000/1.45 = 2068.9), so the rows do not
	// decide.
	_, err := ScanSignals(td+"force_ms.csv", SignalOptions{})
	if pe := AsParseError(err); pe == nil || !strings.Contains(pe.Msg, "every rate from 1936 to 2068 Hz fits the 4 rows") || !strings.Contains(pe.Hint, "--rate") {
		t.Fatalf("got %v", err)
	}
	s, err := ScanSignals(td+"force_ms.csv", SignalOptions{DefaultRateHz: 2000})
	if err != nil {
		t.Fatal(err)
	}
	if s.TimeUnit != "ms" || s.RateHz != 2000 || s.StartS != 0 {
		t.Fatalf("time %s rate %v start %v", s.TimeUnit, s.RateHz, s.StartS)
	}
	if s.Units[0] != "N" || s.Labels[1] != "target" {
		t.Errorf("%q %q", s.Labels, s.Units)
	}
	cols, err := s.Columns()
	if err != nil {
		t.Fatal(err)
	}
	if cols[0][3] != 2.25 || cols[1][0] != 2 {
		t.Errorf("%v", cols)
	}
}

func TestWhitespaceNoHeaderNeedsRate(t *testing.T) {
	_, err := ScanSignals(td+"emg_blank_noheader.txt", SignalOptions{})
	pe := AsParseError(err)
	if pe == nil || !strings.Contains(pe.Hint, "--rate") {
		t.Fatalf("want rate error, got %v", err)
	}
	s, err := ScanSignals(td+"emg_blank_noheader.txt", SignalOptions{RateHz: 1000})
	if err != nil {
		t.Fatal(err)
	}
	if s.Dialect.Delimiter != ' ' || s.Dialect.Header || len(s.Labels) != 3 || s.Rows != 3 {
		t.Fatalf("%+v %q rows %d", s.Dialect, s.Labels, s.Rows)
	}
	src := s.Source()
	defer src.Close()
	dst := make([]float32, 9)
	if err := src.ReadFloat32(0, dst); err != nil {
		t.Fatal(err)
	}
	if dst[3] != -1e-3 || dst[7] != 8.25 {
		t.Errorf("%v", dst)
	}
}

func TestSampleColumnTab(t *testing.T) {
	s, err := ScanSignals(td+"emg_tab_samples.tsv", SignalOptions{RateHz: 512})
	if err != nil {
		t.Fatal(err)
	}
	if s.Dialect.Delimiter != '\t' || s.TimeUnit != "samples" || s.RateHz != 512 || len(s.Labels) != 2 {
		t.Fatalf("%+v %s %v %q", s.Dialect, s.TimeUnit, s.RateHz, s.Labels)
	}
}

func TestGaps(t *testing.T) {
	_, err := ScanSignals(td+"emg_gap.csv", SignalOptions{})
	pe := AsParseError(err)
	if pe == nil || pe.Line != 5 || pe.Column != 1 || !strings.Contains(pe.Hint, "--allow-gaps") {
		t.Fatalf("got %v", err)
	}
	s, err := ScanSignals(td+"emg_gap.csv", SignalOptions{AllowGaps: true, RateHz: 1000})
	if err != nil {
		t.Fatal(err)
	}
	if s.Samples != 7 || s.Rows != 5 || len(s.Gaps) != 1 || s.Gaps[0].Row != 3 || s.Gaps[0].Missing != 2 || s.RateHz != 1000 {
		t.Fatalf("samples %d gaps %+v rate %v", s.Samples, s.Gaps, s.RateHz)
	}
	src := s.Source()
	defer src.Close()
	dst := make([]float64, 7)
	if err := src.ReadFloat64(0, dst[:2]); err != nil {
		t.Fatal(err)
	}
	if err := src.ReadFloat64(2, dst[2:]); err != nil {
		t.Fatal(err)
	}
	want := []float64{1, 2, 3, math.NaN(), math.NaN(), 6, 7}
	for i := range want {
		if !same(dst[i], want[i]) {
			t.Fatalf("%v", dst)
		}
	}
}

func TestSignalErrors(t *testing.T) {
	cases := []struct {
		name, text string
		opt        SignalOptions
		line, col  int
		msg        string
	}{
		{"ragged", "time [s],a,b\n0,1,2\n0.001,1\n", SignalOptions{RateHz: 1000}, 3, 2, "2 fields, expected 3"},
		{"long", "time [s],a,b\n0,1,2\n0.001,1,2,3\n", SignalOptions{RateHz: 1000}, 3, 4, "more than 3"},
		{"text", "time [s],a,b\n0,1,2\n0.001,1,abc\n", SignalOptions{RateHz: 1000}, 3, 3, `text "abc"`},
		{"unit", "time [s],a [furlong],b\n0,1,2\n", SignalOptions{}, 1, 2, "not a UCUM unit"},
		{"backwards", "time [s],a\n0,1\n0.002,1\n0.001,1\n", SignalOptions{}, 4, 1, "backwards"},
		{"repeat", "time [s],a\n0,1\n0.001,1\n0.001,1\n", SignalOptions{}, 4, 1, "repeats"},
		{"empty", "", SignalOptions{}, 0, 0, "no table"},
		{"onlymeta", "a: b\n# c\n", SignalOptions{}, 2, 0, "no table"},
		{"header only", "time [s],a\n", SignalOptions{}, 2, 0, "no data rows"},
		{"rate disagrees", "time [s],a\n0,1\n0.001,1\n0.002,1\n0.003,1\n0.004,1\n", SignalOptions{RateHz: 500}, 2, 1, "rate is 500"},
	}
	for _, c := range cases {
		p := writeTemp(t, "in.csv", c.text)
		s, err := ScanSignals(p, c.opt)
		if err == nil {
			err = s.Decide()
		}
		pe := AsParseError(err)
		if pe == nil {
			t.Errorf("%s: want ParseError, got %v", c.name, err)
			continue
		}
		if pe.Line != c.line || pe.Column != c.col || !strings.Contains(pe.Msg, c.msg) || pe.Hint == "" || pe.File != p {
			t.Errorf("%s: got %+v", c.name, pe)
		}
	}
}

func scanDecide(p string, opt SignalOptions) (*Signals, error) {
	s, err := ScanSignals(p, opt)
	if err != nil {
		return nil, err
	}
	return s, s.Decide()
}

func TestDTypeDecision(t *testing.T) {
	// Near 123 float32 values are 2^-17 (7.6e-6) apart (IEEE 754 binary32,
	// 24-bit significand), so six decimals there do not read back; near 12
	// they are 2^-20 (9.5e-7) apart and six decimals do.
	p := writeTemp(t, "a.csv", "a,b\n12.345678,1\n123.456789,2\n")
	s, err := scanDecide(p, SignalOptions{RateHz: 1})
	if err != nil {
		t.Fatal(err)
	}
	if s.DType != record.Float64 || !strings.Contains(s.DTypeWhy, "line 3, column 1") {
		t.Fatalf("%s %s", s.DType, s.DTypeWhy)
	}
	s, err = scanDecide(p, SignalOptions{RateHz: 1, DType: record.Float32})
	if err != nil {
		t.Fatal(err)
	}
	f := float32(123.456789)
	if want := math.Abs(float64(f) - 123.456789); s.DType != record.Float32 || s.LossyCells != 1 || math.Abs(s.MaxAbsError-want) > 1e-15 {
		t.Fatalf("%s %d %g (%g)", s.DType, s.LossyCells, s.MaxAbsError, want)
	}
	// Integers up to 2^24 are exact in float32; 16777217 = 2^24+1 is not
	// (IEEE 754 binary32 has a 24-bit significand).
	// (A cell with one decimal keeps these files from being integer counts.)
	p = writeTemp(t, "b.csv", "a\n16777216\n-5\n0.5\n")
	if s, _ = scanDecide(p, SignalOptions{RateHz: 1}); s.DType != record.Float32 || !strings.Contains(s.DTypeWhy, "not stored as integer counts: line 4, column 1 (\"0.5\") is written with 1 decimals, earlier cells with 0") {
		t.Errorf("%s", s.DTypeWhy)
	}
	p = writeTemp(t, "c.csv", "a\n16777217\n0.5\n")
	if s, _ = scanDecide(p, SignalOptions{RateHz: 1}); s.DType != record.Float64 {
		t.Errorf("%s", s.DTypeWhy)
	}
	// Whole numbers alone are counts: 16777216 and -5 are -1 and 0 counts
	// of 16777221 plus 16777216 (integer arithmetic).
	p = writeTemp(t, "e.csv", "a\n16777216\n-5\n")
	if s, _ = scanDecide(p, SignalOptions{RateHz: 1}); s.DType != record.Int8 || s.Scale.ScaleUnits != 16777221 || s.Scale.OffsetUnits != 16777216 || s.Scale.Decimals != 0 {
		t.Errorf("%s %+v", s.DTypeWhy, s.Scale)
	}
	// 0.1 written with one digit reads back from float32 (FLT_DIG = 6).
	p = writeTemp(t, "d.csv", "a\n0.1\n1.00000\n3.40282e38\n")
	if s, _ = scanDecide(p, SignalOptions{RateHz: 1}); s.DType != record.Float32 {
		t.Errorf("%s", s.DTypeWhy)
	}
}

// TestParseNumberAgainstStrconv checks the fast reader against the Go
// standard library's correctly rounded strconv.ParseFloat (64 and 32 bits).
func TestParseNumberAgainstStrconv(t *testing.T) {
	cells := []string{"0", "-0", "1", "-1.5", "0.000488", "123456.789012", "1e-3", "-2.5E+4",
		"9007199254740993", "1.7976931348623157e308", "4.9e-324", "1e-45", "1.401298e-45",
		"0.1", "0.2", "0.3", "16777217", "3.4028235e38", "7.038531e-26", "1.00000000000000011102230246251565404236316680908203125",
		"123456789012345678901234567890", "+7", "00012.5000", "1e23", "8.589973e9"}
	for _, c := range cells {
		n, k := parseNumber([]byte(c), false)
		if k != cellNumber {
			t.Errorf("%q: kind %d", c, k)
			continue
		}
		want, _ := strconv.ParseFloat(c, 64)
		if math.Float64bits(n.v) != math.Float64bits(want) {
			t.Errorf("%q: %v, strconv %v", c, n.v, want)
		}
		w32, _ := strconv.ParseFloat(c, 32)
		if got := toF32(&n, []byte(c), false); math.Float32bits(got) != math.Float32bits(float32(w32)) {
			t.Errorf("%q: f32 %v, strconv %v", c, got, float32(w32))
		}
	}
	for _, c := range []string{"abc", "1.2.3", "1e", "--1", "1,5", "0x10", "e5", "1e5x"} {
		if _, k := parseNumber([]byte(c), false); k != cellText {
			t.Errorf("%q accepted", c)
		}
	}
	if n, k := parseNumber([]byte("-1,25"), true); k != cellNumber || n.v != -1.25 {
		t.Errorf("decimal comma: %v %d", n.v, k)
	}
}
