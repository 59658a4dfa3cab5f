package analysis

import (
	"math"
	"testing"
)

// The rate of agreement, RoA = common / (common + only-in-A + only-in-B), is
// the standard definition used in the HD-sEMG decomposition validation
// literature to compare two spike trains of one motor unit (from memory;
// discharges "common" when they coincide within a small tolerance, commonly
// 0.5 ms).
//
// Worked example, computed by hand (tolerance 0.5 ms, no lag):
//
//	A: 10.0  20.0  30.0  40.0  50.0          ms
//	B: 10.3  20.6  30.2  45.0  50.5          ms
//	10.0-10.3: 0.3 ms   common
//	20.0-20.6: 0.6 ms   too far: 20.0 only in A, 20.6 only in B
//	30.0-30.2: 0.2 ms   common
//	40.0, 45.0          only in A, only in B
//	50.0-50.5: 0.5 ms   common (the tolerance is inclusive)
//	common 3, only A 2, only B 2: RoA = 3 / (3+2+2) = 3/7 = 0.428571...
func TestRateOfAgreementWorkedExample(t *testing.T) {
	a := []float64{0.0100, 0.0200, 0.0300, 0.0400, 0.0500}
	b := []float64{0.0103, 0.0206, 0.0302, 0.0450, 0.0505}
	c, na, nb := Agreement(a, b, 0.0005, 0)
	if c != 3 || na != 2 || nb != 2 {
		t.Fatalf("common %d only-A %d only-B %d, want 3 2 2", c, na, nb)
	}
	if r := RateOfAgreement(c, na, nb); math.Abs(r-3.0/7) > 1e-12 {
		t.Errorf("RoA %v, want 3/7", r)
	}
}

// Second hand-computed example: B is A delayed by exactly 1 ms with one
// extra discharge. At lag 0 no pair is within 0.5 ms (RoA 0); the search
// over ±2 ms finds lag +1 ms: common 4, only A 0, only B 1, RoA 4/5 = 0.8.
func TestCompareFindsLagAndMatches(t *testing.T) {
	a1 := []float64{0.100, 0.200, 0.300, 0.400}
	b1 := []float64{0.101, 0.201, 0.250, 0.301, 0.401}
	// A second unit in each, far from the first, identical between A and B.
	a2 := []float64{0.150, 0.350, 0.550}
	b2 := []float64{0.150, 0.350, 0.550}
	// A unit only A has.
	a3 := []float64{0.123, 0.523, 0.923}
	if c, _, _ := Agreement(a1, b1, 0.0005, 0); c != 0 {
		t.Fatalf("at lag 0 common %d, want 0", c)
	}
	res := Compare([]Train{{1, "MU1", a1}, {2, "MU2", a2}, {3, "", a3}}, []Train{{10, "7", b1}, {20, "8", b2}},
		CompareOptions{LagStepS: 0.0005})
	if len(res.Pairs) != 2 {
		t.Fatalf("pairs %+v", res.Pairs)
	}
	p := res.Pairs[0]
	if p.A != 1 || p.B != 10 || p.NameA != "MU1" || p.NameB != "7" || p.Common != 4 || p.OnlyA != 0 || p.OnlyB != 1 {
		t.Errorf("pair 1: %+v", p)
	}
	if math.Abs(p.LagS-0.001) > 1e-12 || math.Abs(p.RoA-0.8) > 1e-12 {
		t.Errorf("pair 1 lag %v RoA %v, want 0.001 and 0.8", p.LagS, p.RoA)
	}
	if q := res.Pairs[1]; q.A != 2 || q.B != 20 || q.RoA != 1 || q.LagS != 0 {
		t.Errorf("pair 2: %+v", q)
	}
	if len(res.UnmatchedA) != 1 || res.UnmatchedA[0] != 3 || res.UnmatchedNamesA[0] != "" || len(res.UnmatchedB) != 0 {
		t.Errorf("unmatched A %v B %v", res.UnmatchedA, res.UnmatchedB)
	}
}
