package analysis

import (
	"math"
	"sort"
)

// Defaults for comparing decompositions.
const (
	// RoAToleranceS is how close two discharges must be to count as one:
	// 0.5 ms (common practice in decomposition validation).
	RoAToleranceS = 0.0005
	// RoAMaxLagS bounds the constant lag searched between two trains of the
	// same unit: ±2 ms (the MUAP's detection point may differ between
	// methods by a few samples).
	RoAMaxLagS = 0.002
	// RoAMinMatch is the least rate of agreement at which two units are
	// taken as the same unit: 0.3.
	RoAMinMatch = 0.3
)

// CompareOptions tune Compare. Zero values take the defaults above.
type CompareOptions struct {
	ToleranceS float64
	MaxLagS    float64
	// LagStepS is the step of the lag search, normally one sample period of
	// the decomposed array; 0 means ToleranceS/2.
	LagStepS float64
	MinRoA   float64
}

func (o CompareOptions) withDefaults() CompareOptions {
	if o.ToleranceS <= 0 {
		o.ToleranceS = RoAToleranceS
	}
	if o.MaxLagS < 0 {
		o.MaxLagS = 0
	} else if o.MaxLagS == 0 {
		o.MaxLagS = RoAMaxLagS
	}
	if o.LagStepS <= 0 {
		o.LagStepS = o.ToleranceS / 2
	}
	if o.MinRoA <= 0 {
		o.MinRoA = RoAMinMatch
	}
	return o
}

// Train is one unit's discharge times in seconds from the trial start,
// ascending.
type Train struct {
	ID int64
	// Name is what people see: the lab's label, the id when there is none
	// (record.Unit.Name).
	Name   string
	TimesS []float64
}

// Agreement counts the discharges of trains a and b that coincide, given
// that b runs lagS later than a: a discharge ta of a and tb of b coincide
// when |ta - (tb - lagS)| <= tolS, each discharge pairing at most once
// (greedy in time order, which gives the largest number of pairs for points
// on a line). Both slices must be ascending.
func Agreement(a, b []float64, tolS, lagS float64) (common, onlyA, onlyB int) {
	common, onlyA, onlyB, _ = agreement(a, b, tolS, lagS)
	return
}

// agreement is Agreement that also returns the sum of |time differences|
// of the coinciding pairs, s.
func agreement(a, b []float64, tolS, lagS float64) (common, onlyA, onlyB int, resid float64) {
	i, j := 0, 0
	// A small slack absorbs rounding of times computed from sample indices.
	tol := tolS * (1 + 1e-9)
	for i < len(a) && j < len(b) {
		d := (b[j] - lagS) - a[i]
		switch {
		case d < -tol:
			j++
		case d > tol:
			i++
		default:
			resid += math.Abs(d)
			common++
			i++
			j++
		}
	}
	return common, len(a) - common, len(b) - common, resid
}

// RateOfAgreement is common / (common + onlyA + onlyB), 0..1; NaN when both
// trains are empty.
func RateOfAgreement(common, onlyA, onlyB int) float64 {
	d := common + onlyA + onlyB
	if d == 0 {
		return math.NaN()
	}
	return float64(common) / float64(d)
}

// Pair is one matched pair of units.
type Pair struct {
	A int64 `json:"a"`
	B int64 `json:"b"`
	// NameA and NameB are the units' names (Train.Name).
	NameA string `json:"label_a"`
	NameB string `json:"label_b"`
	// LagS is how much later B's discharges come than A's at the best
	// alignment, s.
	LagS   float64 `json:"lag_s"`
	Common int     `json:"common"`
	OnlyA  int     `json:"only_a"`
	OnlyB  int     `json:"only_b"`
	// RoA is the rate of agreement common / (common + only_a + only_b), 0..1.
	RoA float64 `json:"roa"`
}

// Comparison is the result of Compare.
type Comparison struct {
	ToleranceS float64 `json:"tolerance_s"`
	MaxLagS    float64 `json:"max_lag_s"`
	MinRoA     float64 `json:"min_roa"`
	Pairs      []Pair  `json:"pairs"`
	// UnmatchedA and UnmatchedB list the unit ids with no partner, and
	// UnmatchedNamesA and UnmatchedNamesB their names.
	UnmatchedA      []int64  `json:"unmatched_a"`
	UnmatchedB      []int64  `json:"unmatched_b"`
	UnmatchedNamesA []string `json:"unmatched_labels_a"`
	UnmatchedNamesB []string `json:"unmatched_labels_b"`
}

// bestLag returns the agreement of a and b at the lag in [-MaxLagS,
// +MaxLagS] (steps of LagStepS) with the most common discharges; among
// equal counts the lag with the smallest summed |time difference| of the
// coinciding pairs wins, then the smallest |lag|.
func bestLag(a, b []float64, o CompareOptions) Pair {
	k := int(math.Floor(o.MaxLagS/o.LagStepS + 1e-9))
	best, bestResid := Pair{Common: -1}, math.Inf(1)
	for s := 0; s <= k; s++ {
		for _, sign := range []float64{1, -1} {
			if s == 0 && sign < 0 {
				continue
			}
			lag := sign * float64(s) * o.LagStepS
			c, na, nb, r := agreement(a, b, o.ToleranceS, lag)
			// Residual sums within a nanosecond count as equal.
			if c > best.Common || c == best.Common && r < bestResid-1e-9 {
				best, bestResid = Pair{LagS: lag, Common: c, OnlyA: na, OnlyB: nb}, r
			}
		}
	}
	best.RoA = RateOfAgreement(best.Common, best.OnlyA, best.OnlyB)
	return best
}

// Compare matches the units of decomposition a with those of b: for every
// pair it finds the best lag and its rate of agreement, then takes pairs one
// to one in order of falling rate of agreement while it is at least MinRoA.
// Units left over are listed as unmatched.
func Compare(a, b []Train, opt CompareOptions) Comparison {
	o := opt.withDefaults()
	var cand []Pair
	for _, ua := range a {
		for _, ub := range b {
			p := bestLag(ua.TimesS, ub.TimesS, o)
			p.A, p.B, p.NameA, p.NameB = ua.ID, ub.ID, ua.Name, ub.Name
			if p.RoA >= o.MinRoA {
				cand = append(cand, p)
			}
		}
	}
	sort.SliceStable(cand, func(i, j int) bool {
		if cand[i].RoA != cand[j].RoA {
			return cand[i].RoA > cand[j].RoA
		}
		return cand[i].Common > cand[j].Common
	})
	usedA, usedB := map[int64]bool{}, map[int64]bool{}
	res := Comparison{ToleranceS: o.ToleranceS, MaxLagS: o.MaxLagS, MinRoA: o.MinRoA,
		Pairs: []Pair{}, UnmatchedA: []int64{}, UnmatchedB: []int64{}, UnmatchedNamesA: []string{}, UnmatchedNamesB: []string{}}
	for _, p := range cand {
		if usedA[p.A] || usedB[p.B] {
			continue
		}
		usedA[p.A], usedB[p.B] = true, true
		res.Pairs = append(res.Pairs, p)
	}
	sort.Slice(res.Pairs, func(i, j int) bool { return res.Pairs[i].A < res.Pairs[j].A })
	for _, u := range a {
		if !usedA[u.ID] {
			res.UnmatchedA, res.UnmatchedNamesA = append(res.UnmatchedA, u.ID), append(res.UnmatchedNamesA, u.Name)
		}
	}
	for _, u := range b {
		if !usedB[u.ID] {
			res.UnmatchedB, res.UnmatchedNamesB = append(res.UnmatchedB, u.ID), append(res.UnmatchedNamesB, u.Name)
		}
	}
	return res
}
