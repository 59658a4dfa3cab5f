package convert

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

// FuzzQuantumFinder feeds the quantum finder cells (one per line) and
// checks what it claims against independent arithmetic: when it chooses
// counts, every cell is k × scale + offset exactly (integers of the cell's
// digits, read with strconv.ParseInt), k fits the type, the counts print
// back as the cell byte for byte, and the physical value is
// strconv.ParseFloat's (correctly rounded) float64 of the cell. When a cell
// is not a plain decimal of the common form it must refuse. Splitting the
// cells into two blocks and merging gives the same choice as one pass.
// The seeds run in make test.
func FuzzQuantumFinder(f *testing.F) {
	for _, s := range []string{
		"0.1907\n-0.3814\n0.5721", // counts of an LSB of 0.1907
		"0.19\n-0.38\n0.57\n0.76", // the same rounded to 2 decimals
		"12\n-5\n16777216", "0.00\n-0.00", "1e3\n2", "0.5\n0.25", "-0.0596\n0.1192\n1000.0000",
		"007\n8", "+1\n2", "123456789012345678\n1", "9007199254740991\n0", "0.5\n", "\n", "NaN\n1",
		"2147483647\n-2147483648", "4294967296\n0", "0.0000001\n0.0000003", "1.\n2.", ".5\n1.5", "-1\n-1\n-1",
	} {
		f.Add(s, false)
	}
	f.Add("1,25\n-0,75\n3,00", true)
	f.Fuzz(func(t *testing.T, text string, comma bool) {
		sep := byte('.')
		if comma {
			sep = ','
		}
		cells := strings.Split(text, "\n")
		var all, a, b quantumStats
		for i, c := range cells {
			all.add([]byte(c), sep, i+1, 1)
			if i < len(cells)/2 {
				a.add([]byte(c), sep, i+1, 1)
			} else {
				b.add([]byte(c), sep, i+1, 1)
			}
		}
		a.merge(&b)
		typ, sc, why, ok := all.choose("uV")
		typ2, sc2, _, ok2 := a.choose("uV")
		if ok != ok2 || typ != typ2 || sc != sc2 {
			t.Fatalf("one pass: %v %s %+v; two blocks merged: %v %s %+v", ok, typ, sc, ok2, typ2, sc2)
		}
		dec := -1
		plain := true
		for _, c := range cells {
			d := strings.ReplaceAll(c, string(sep), ".")
			if sep == ',' && strings.Contains(c, ".") {
				plain = false
			}
			p := 0
			if i := strings.IndexByte(d, '.'); i >= 0 {
				p = len(d) - i - 1
			}
			if dec < 0 {
				dec = p
			}
			digits := strings.TrimLeft(strings.NewReplacer("-", "", ".", "").Replace(d), "0")
			u, uerr := strconv.ParseUint(digits, 10, 64)
			if !plainDecimal.MatchString(d) || p != dec || digits != "" && (uerr != nil || u >= 1<<53) || strings.HasPrefix(d, "-") && digits == "" {
				plain = false
			}
		}
		if !plain && ok {
			t.Fatalf("cells %q are not all plain decimals of one form, yet counts were chosen: %s", cells, why)
		}
		if !ok {
			return
		}
		lo, hi := typ.CountRange()
		for _, c := range cells {
			d := strings.ReplaceAll(c, string(sep), ".")
			m, err := strconv.ParseInt(strings.Replace(d, ".", "", 1), 10, 64)
			if err != nil {
				t.Fatalf("%q: %v", c, err)
			}
			if (m-sc.OffsetUnits)%sc.ScaleUnits != 0 {
				t.Fatalf("%q is no whole number of counts of %+v", c, sc)
			}
			k := (m - sc.OffsetUnits) / sc.ScaleUnits
			if k < lo || k > hi {
				t.Fatalf("%q: %d counts do not fit %s", c, k, typ)
			}
			if got := string(sc.AppendText(nil, k)); got != d {
				t.Fatalf("%q: %d counts print as %q", c, k, got)
			}
			want, _ := strconv.ParseFloat(d, 64)
			if got := sc.Physical(k); math.Float64bits(got) != math.Float64bits(want) {
				t.Fatalf("%q: %d counts are %v, strconv reads %v", c, k, got, want)
			}
		}
	})
}
