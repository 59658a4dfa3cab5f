package analysis

import "math"

// Fit is an ordinary least-squares straight line y = Slope*x + Intercept.
type Fit struct {
	// N is the number of points used (pairs where both values are known).
	N int `json:"n"`
	// Slope is in y units per x unit (e.g. pps per % MVC).
	Slope float64 `json:"slope"`
	// Intercept is y at x = 0, in y units.
	Intercept float64 `json:"intercept"`
	// R2 is the coefficient of determination (the squared Pearson
	// correlation), 0..1.
	R2 float64 `json:"r2"`
}

// LinearFit fits y = a*x + b by ordinary least squares over the pairs where
// both x and y are finite. With fewer than two such points, or all x equal,
// Slope, Intercept and R2 are NaN; with all y equal R2 is NaN.
func LinearFit(x, y []float64) Fit {
	f, _ := LeastSquares(x, y)
	return f
}

// Sums are the centred sums of a least-squares fit, for figures built on
// it (standard errors, confidence intervals): Sxx = sum (x - mean x)^2,
// Syy likewise for y, Sxy = sum (x - mean x)(y - mean y).
type Sums struct{ Sxx, Syy, Sxy float64 }

// LeastSquares is LinearFit that also returns the centred sums.
func LeastSquares(x, y []float64) (Fit, Sums) {
	var xs, ys []float64
	for i := range x {
		if i < len(y) && finite(x[i]) && finite(y[i]) {
			xs = append(xs, x[i])
			ys = append(ys, y[i])
		}
	}
	f := Fit{N: len(xs), Slope: math.NaN(), Intercept: math.NaN(), R2: math.NaN()}
	if f.N < 2 {
		return f, Sums{}
	}
	mx, _ := meanStd(xs)
	my, _ := meanStd(ys)
	var s Sums
	for i := range xs {
		dx, dy := xs[i]-mx, ys[i]-my
		s.Sxx += dx * dx
		s.Syy += dy * dy
		s.Sxy += dx * dy
	}
	if s.Sxx == 0 {
		return f, s
	}
	f.Slope = s.Sxy / s.Sxx
	f.Intercept = my - f.Slope*mx
	if s.Syy > 0 {
		f.R2 = s.Sxy * s.Sxy / (s.Sxx * s.Syy)
	}
	return f, s
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
