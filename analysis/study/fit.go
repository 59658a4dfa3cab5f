package study

import (
	"math"
	"muarc/analysis"

	"gonum.org/v1/gonum/stat/distuv"
)

// LineFit is an ordinary least-squares line y = Slope*x + Intercept with
// the 95 % confidence interval of the slope (Student's t, n - 2 degrees of
// freedom). Unknown figures are NaN.
type LineFit struct {
	N         int     `json:"n"`
	Slope     float64 `json:"slope"`
	Intercept float64 `json:"intercept"`
	R2        float64 `json:"r2"`
	// SlopeSE is the standard error of the slope; SlopeCILow and
	// SlopeCIHigh bound its 95 % confidence interval (n >= 3).
	SlopeSE     float64 `json:"slope_se"`
	SlopeCILow  float64 `json:"slope_ci_low"`
	SlopeCIHigh float64 `json:"slope_ci_high"`
}

// FitLine fits y on x over the pairs where both are finite
// (analysis.LeastSquares), with the slope's standard error and 95 %
// confidence interval.
func FitLine(x, y []float64) LineFit {
	ls, sum := analysis.LeastSquares(x, y)
	nan := math.NaN()
	f := LineFit{N: ls.N, Slope: ls.Slope, Intercept: ls.Intercept, R2: ls.R2, SlopeSE: nan, SlopeCILow: nan, SlopeCIHigh: nan}
	if f.N >= 3 && sum.Sxx > 0 {
		rss := math.Max(0, sum.Syy-f.Slope*sum.Sxy)
		f.SlopeSE = math.Sqrt(rss / float64(f.N-2) / sum.Sxx)
		t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(f.N - 2)}.Quantile(0.975)
		f.SlopeCILow, f.SlopeCIHigh = f.Slope-t*f.SlopeSE, f.Slope+t*f.SlopeSE
	}
	return f
}

// Spread summarises values across subjects. Unknown figures are NaN.
type Spread struct {
	N    int     `json:"n"`
	Mean float64 `json:"mean"`
	// SD is the sample standard deviation (n - 1), NaN below 2 values.
	SD  float64 `json:"sd"`
	Min float64 `json:"min"`
	Max float64 `json:"max"`
}

// SpreadOf summarises the finite values of v.
func SpreadOf(v []float64) Spread {
	var xs []float64
	for _, x := range v {
		if finite(x) {
			xs = append(xs, x)
		}
	}
	nan := math.NaN()
	s := Spread{N: len(xs), Mean: nan, SD: nan, Min: nan, Max: nan}
	if len(xs) == 0 {
		return s
	}
	s.Mean = mean(xs)
	s.Min, s.Max = xs[0], xs[0]
	var ss float64
	for _, x := range xs {
		s.Min, s.Max = math.Min(s.Min, x), math.Max(s.Max, x)
		ss += (x - s.Mean) * (x - s.Mean)
	}
	if len(xs) > 1 {
		s.SD = math.Sqrt(ss / float64(len(xs)-1))
	}
	return s
}

func mean(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
