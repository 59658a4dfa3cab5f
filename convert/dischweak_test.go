package convert

import (
	"fmt"
	"slices"
	"strings"
	"testing"
)

// readWeak reads text with every option detected, and again with the weak
// rules not yielding (the reader before they did), and returns both.
func readWeak(t *testing.T, text string, g Grid) (*Discharges, error, error) {
	t.Helper()
	p := writeTemp(t, "d.txt", text)
	weakRulesYield = false
	_, before := ReadDischarges(p, g, DischargeOptions{FirstIndex: -1})
	weakRulesYield = true
	dc, err := ReadDischarges(p, g, DischargeOptions{FirstIndex: -1})
	return dc, err, before
}

func trainsText(dc *Discharges) string {
	var b strings.Builder
	for _, u := range dc.Units {
		fmt.Fprintf(&b, "%q:%v ", u.Label, u.Discharges)
	}
	return strings.TrimSpace(b.String())
}

// Files that every reading of the text stores the same way, once the weak
// preferences (every unit with at most one discharge, a header cell that
// looks like numbers) are set aside, or where a header names a label and
// time columns over labels without times, or where the digits written put
// the times on the sample grid in one time base only: read now, refused
// before. The values are what the files write (sample indices counted
// from the first data row; times x rate).
func TestDischargeWeakRulesYieldWhenConclusive(t *testing.T) {
	matrix := "MU 38,MU 16,MU 60\n" + strings.Repeat("0,0,0\n", 5) + "1,0,0\n0,0,1\n" + strings.Repeat("0,0,0\n", 3) + "0,1,0\n" + strings.Repeat("0,0,0\n", 4)
	var cols strings.Builder
	cols.WriteString("30-5\t40-5\t7-5\n")
	for _, r := range []string{"1,500\t2,250\t3,125", "1,750\t2,500", "2,000"} {
		cols.WriteString(r + "\n")
	}
	for _, c := range []struct {
		name, text string
		g          Grid
		want       string
		note       string
	}{
		// A 0/1 matrix of three units with one discharge each: the
		// columns readings of the same cells put every unit's times on
		// one sample twice (impossible for a motor unit), so the matrix
		// is the only reading left.
		{"sparse matrix", matrix, Grid{RateHz: 2048, Samples: 100}, `"MU 38":[5] "MU 16":[10] "MU 60":[6]`, "none of the 3 units would have more than one discharge"},
		// A lines file with a header naming a label column and a time
		// column, and one unit without times: the header says what the
		// line is.
		{"a unit without times", "unit,t1 (1-based)\nMU 84\n", Grid{RateHz: 4096, Samples: 1000}, `"MU 84":[]`, "the only one of"},
		// Labels that look like numbers with a decimal comma ("30-5"
		// from "30.5"), times in s with a decimal comma: x 1000 Hz.
		{"labels like numbers", cols.String(), Grid{RateHz: 1000, Samples: 5000}, `"30-5":[1500 1750 2000] "40-5":[2250 2500] "7-5":[3125]`, "is numbers, not a label"},
		// Seconds written to the sample exactly (9.62890625 s x 4096 Hz
		// = 39440, 19.7119140625 s = 80740); read as ms they would lie 0.44 samples from any
		// sample, far more than the 8 decimals allow.
		{"digits decide s over ms", "unit,time\nMU1,9.62890625\nMU1,19.7119140625\nMU2,10.0517578125\n", Grid{RateHz: 4096, Samples: 100000}, `"MU1":[39440 80740] "MU2":[41172]`, "more than its digits allow"},
	} {
		t.Run(c.name, func(t *testing.T) {
			dc, err, before := readWeak(t, c.text, c.g)
			if err != nil {
				t.Fatalf("refused: %v", err)
			}
			if got := trainsText(dc); got != c.want {
				t.Errorf("stored %s, want %s", got, c.want)
			}
			if before == nil {
				t.Errorf("read before the weak rules yielded too: the case shows nothing")
			}
			if !slices.ContainsFunc(dc.Notes, func(n string) bool { return strings.Contains(n, c.note) }) {
				t.Errorf("notes do not say why the others were left: %q", dc.Notes)
			}
		})
	}
}

// Where the readings left by the weak rules store different values, the
// file is still refused, naming them.
func TestDischargeWeakRulesStillRefuseDifferentValues(t *testing.T) {
	for _, c := range []struct {
		name, text string
		g          Grid
		want       []string
	}{
		// One number per line: three labels without times, or three units
		// with one time each (both weak).
		{"labels or lone times", "1\n2\n3\n", Grid{RateHz: 1000, Samples: 100}, []string{"--labels yes", "--labels no"}},
		// Whole numbers: ms or samples at 2048 Hz both fit the digits
		// written (half a ms is a whole sample).
		{"ms or samples", "unit,time\nMU1,412\nMU1,530\n", Grid{RateHz: 2048, Samples: 5000}, []string{"--time-base ms", "--time-base samples"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err, _ := readWeak(t, c.text, c.g)
			pe := AsParseError(err)
			if pe == nil {
				t.Fatalf("read, want a refusal: %v", err)
			}
			for _, w := range c.want {
				if !strings.Contains(pe.Error(), w) {
					t.Errorf("refusal lacks %q: %v", w, pe)
				}
			}
		})
	}
}
