package record

import (
	"math"
	"math/rand"
	"strconv"
	"testing"
)

// TestDecimalScale: counts of a decimal scale print as fixed-point text and
// read as strconv.ParseFloat (correctly rounded, the Go standard library)
// of that text; the attributes give the scale back; Count inverts Physical.
func TestDecimalScale(t *testing.T) {
	rng := rand.New(rand.NewSource(3))
	for i := 0; i < 20000; i++ {
		d := rng.Intn(9)
		g := 1 + rng.Int63n(20000)
		c := rng.Int63n(2000000) - 1000000
		s, err := DecimalScale(g, c, d)
		if err != nil {
			t.Fatal(err)
		}
		back, err := ScaleFromAttrs(s.ScaleFactor, s.AddOffset, d)
		if err != nil || back != s {
			t.Fatalf("%+v from its attributes: %+v %v", s, back, err)
		}
		k := rng.Int63n(1<<32) - 1<<31
		text := string(s.AppendText(nil, k))
		// The same decimal by strconv on the integer: m = k*g + c.
		m := k*g + c
		digits := strconv.FormatInt(m, 10)
		if d > 0 {
			neg := m < 0
			u := strconv.FormatInt(max(m, -m), 10)
			for len(u) <= d {
				u = "0" + u
			}
			digits = u[:len(u)-d] + "." + u[len(u)-d:]
			if neg {
				digits = "-" + digits
			}
		}
		if text != digits {
			t.Fatalf("%d counts of %+v print %q, want %q", k, s, text, digits)
		}
		want, _ := strconv.ParseFloat(text, 64)
		if got := s.Physical(k); math.Float64bits(got) != math.Float64bits(want) {
			t.Fatalf("%d counts of %+v are %v, strconv reads %q as %v", k, s, got, text, want)
		}
		if k2, ok := s.Count(want); !ok || k2 != k {
			t.Fatalf("Count(%v) = %d %v, want %d", want, k2, ok, k)
		}
	}
	if _, ok := (CountScale{ScaleFactor: 0.5, Decimals: 1, ScaleUnits: 5}).Count(0.3); ok {
		t.Fatal("0.3 is no whole number of counts of 0.5")
	}
	if _, err := ScaleFromAttrs(0.1907000001, 0, 4); err == nil {
		t.Fatal("0.1907000001 taken for a scale with 4 decimals")
	}
	if _, err := ScaleFromAttrs(0, 0, -1); err == nil {
		t.Fatal("a scale_factor of 0 taken")
	}
}

// TestLinearScale: EDF and BDF counts are counts × scale + offset in
// float64, product and sum rounded separately (IEEE 754 arithmetic).
func TestLinearScale(t *testing.T) {
	s := LinearScale(6553.5/65535, -3276.8-(-32768)*(6553.5/65535))
	for _, k := range []int64{-32768, -1, 0, 1, 32767} {
		p := float64(k) * s.ScaleFactor
		if got := s.Physical(k); got != p+s.AddOffset {
			t.Fatalf("%d: %v want %v", k, got, p+s.AddOffset)
		}
		if k2, ok := s.Count(s.Physical(k)); !ok || k2 != k {
			t.Fatalf("Count inverts %d as %d %v", k, k2, ok)
		}
	}
	if SmallestCountType(-128, 127) != Int8 || SmallestCountType(-129, 0) != Int16 || SmallestCountType(0, 1<<31) != "" || SmallestCountType(-1<<31, 0) != Int32 {
		t.Fatal("SmallestCountType")
	}
}
