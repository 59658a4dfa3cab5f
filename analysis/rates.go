package analysis

import (
	"math"
)

// DischargeTimesS converts discharge sample indices of an array sampled at
// rateHz, whose sample 0 lies at startS, to seconds from the trial start.
func DischargeTimesS(discharges []int64, rateHz, startS float64) []float64 {
	t := make([]float64, len(discharges))
	for i, d := range discharges {
		t[i] = startS + float64(d)/rateHz
	}
	return t
}

// ISIsS returns the inter-discharge intervals in seconds of sorted discharge
// times in seconds (one fewer than the times).
func ISIsS(timesS []float64) []float64 {
	if len(timesS) < 2 {
		return nil
	}
	out := make([]float64, len(timesS)-1)
	for i := range out {
		out[i] = timesS[i+1] - timesS[i]
	}
	return out
}

// InstantRatesPPS returns the instantaneous discharge rates in pulses per
// second: 1/ISI for each interval between consecutive discharges, so rate k
// belongs to the interval from discharge k to discharge k+1. An interval of
// zero or less (duplicate or unsorted discharges) gives NaN.
func InstantRatesPPS(timesS []float64) []float64 {
	isi := ISIsS(timesS)
	for i, d := range isi {
		if d > 0 {
			isi[i] = 1 / d
		} else {
			isi[i] = math.NaN()
		}
	}
	return isi
}

// meanStd returns the mean and the sample standard deviation (n-1) of v.
func meanStd(v []float64) (mean, std float64) {
	n := float64(len(v))
	if n == 0 {
		return math.NaN(), math.NaN()
	}
	for _, x := range v {
		mean += x
	}
	mean /= n
	if n < 2 {
		return mean, math.NaN()
	}
	var ss float64
	for _, x := range v {
		ss += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(ss / (n - 1))
}

// SmoothedRateWindowS is the default length of the Hann window that smooths
// discharge rates for display: 400 ms (common practice for plots of
// discharge rate against force).
const SmoothedRateWindowS = 0.4

// SmoothedRatePPS returns a discharge rate curve in pulses per second on the
// time grid t0, t0+stepS, ... < t1: the discharge train (one unit impulse per
// discharge time) convolved with a Hann window windowS long normalised to
// unit area, h(u) = (1 + cos(2πu/windowS)) / windowS for |u| <= windowS/2,
// evaluated at the grid times exactly (the grid step does not move the
// discharges). A steady train of rate r gives r away from its ends (exactly
// so when windowS*r is a whole number of two or more).
func SmoothedRatePPS(timesS []float64, t0, t1, stepS, windowS float64) []float64 {
	if stepS <= 0 || t1 <= t0 || windowS <= 0 {
		return nil
	}
	n := int(math.Ceil((t1 - t0) / stepS))
	out := make([]float64, n)
	half := windowS / 2
	for _, t := range timesS {
		a := int(math.Ceil((t - half - t0) / stepS))
		b := int(math.Floor((t + half - t0) / stepS))
		for j := max(a, 0); j <= b && j < n; j++ {
			u := t0 + float64(j)*stepS - t
			out[j] += (1 + math.Cos(2*math.Pi*u/windowS)) / windowS
		}
	}
	return out
}
