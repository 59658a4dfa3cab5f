package convert

import (
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// FuzzParseNumber checks the fast number reader against the Go standard
// library's strconv.ParseFloat (correctly rounded, 64 and 32 bits) on every
// cell both accept.
func FuzzParseNumber(f *testing.F) {
	for _, s := range []string{"0", "-0.000488", "12.345678", "1e-45", "9007199254740993", "NaN", "", "1.5e308", "abc", "-", "0.1000"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		n, k := parseNumber([]byte(s), false)
		want, err := strconv.ParseFloat(s, 64)
		if k != cellNumber {
			return
		}
		if err != nil {
			if ne, ok := err.(*strconv.NumError); ok && ne.Err == strconv.ErrRange {
				if math.Float64bits(n.v) != math.Float64bits(want) {
					t.Fatalf("%q: %v, strconv %v", s, n.v, want)
				}
				return
			}
			// Words strconv takes (inf, infinity) we read as well; others
			// must not be accepted.
			if _, ok := infValue([]byte(s)); !ok {
				t.Fatalf("%q accepted, strconv refuses: %v", s, err)
			}
			return
		}
		if math.Float64bits(n.v) != math.Float64bits(want) && !(math.IsNaN(n.v) && math.IsNaN(want)) {
			t.Fatalf("%q: %v, strconv %v", s, n.v, want)
		}
		w32, _ := strconv.ParseFloat(s, 32)
		if got := toF32(&n, []byte(s), false); math.Float32bits(got) != math.Float32bits(float32(w32)) && !math.IsNaN(w32) {
			t.Fatalf("%q: float32 %v, strconv %v", s, got, float32(w32))
		}
		// A float32 judged exact must print back to the digits written.
		f32 := toF32(&n, []byte(s), false)
		if f32Exact(&n, f32) && n.digits > 0 && n.digits <= 19 && !math.IsInf(float64(f32), 0) && !printsBack(&n, float64(f32), 32) {
			t.Fatalf("%q: judged exact in float32 but %v does not print back", s, f32)
		}
	})
}

// FuzzScanSignals feeds arbitrary text to both passes: an error or a
// consistent result, never a panic; the second pass gives as many rows as
// the first found.
func FuzzScanSignals(f *testing.F) {
	seeds := []string{
		"time [s],a [uV],b [uV]\n0,1,2\n0.001,3,4\n",
		"\xef\xbb\xbfrate: 100 Hz\r\n\r\ntime;x\r\n0;1,5\r\n0,01;2,5\r\n",
		"# c\n1 2 3\n4 5 6\n",
		"sample\tA\n0\t1\n1\t2\n",
		"time [s],a\n0,1\n0.001,\n0.003,NaN\n",
		"a,b\n1,2\n3\n",
		"",
	}
	for _, s := range seeds {
		f.Add(s, 1000.0, true)
	}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, text string, rate float64, gaps bool) {
		p := filepath.Join(dir, "f.csv")
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		s, err := ScanSignals(p, SignalOptions{RateHz: math.Abs(rate), AllowGaps: gaps})
		if err != nil {
			return
		}
		if s.Samples > 10_000_000 {
			return // a huge gap; too big to read back here
		}
		cols, err := s.Columns()
		if err != nil {
			t.Fatalf("second pass failed after a good first pass: %v", err)
		}
		if len(cols) != len(s.Labels) || len(cols[0]) != s.Samples {
			t.Fatalf("shape %d x %d, want %d x %d", len(cols), len(cols[0]), len(s.Labels), s.Samples)
		}
	})
}
