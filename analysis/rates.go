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
// discharge, placed on the nearest grid point) convolved with a Hann window
// windowS long normalised to unit area. A train of steady rate r gives r
// away from its ends.
func SmoothedRatePPS(timesS []float64, t0, t1, stepS, windowS float64) []float64 {
	if stepS <= 0 || t1 <= t0 {
		return nil
	}
	n := int(math.Ceil((t1 - t0) / stepS))
	out := make([]float64, n)
	half := int(math.Round(windowS / stepS / 2))
	if half < 1 {
		half = 1
	}
	// Hann window of 2*half+1 points, zero at both ends, scaled so that its
	// sum times stepS is one (unit area in seconds).
	w := make([]float64, 2*half+1)
	var sum float64
	for k := range w {
		w[k] = 0.5 - 0.5*math.Cos(2*math.Pi*float64(k)/float64(2*half))
		sum += w[k]
	}
	for k := range w {
		w[k] /= sum * stepS
	}
	for _, t := range timesS {
		c := int(math.Round((t - t0) / stepS))
		for k, wk := range w {
			j := c + k - half
			if j >= 0 && j < n {
				out[j] += wk
			}
		}
	}
	return out
}
