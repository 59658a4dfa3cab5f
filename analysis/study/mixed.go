package study

import (
	"math"

	"gonum.org/v1/gonum/optimize"
)

// MixedFit is a linear mixed model y = b0 + b1 x + u0 + u1 x + e with a
// random intercept u0 and a random slope u1 per subject ((u0, u1) normal
// with covariance Psi, e normal with variance WithinVar), fitted by
// restricted maximum likelihood. Unknown figures are NaN.
type MixedFit struct {
	Subjects int `json:"subjects"`
	N        int `json:"n"`
	// Slope and Intercept are the fixed effects b1 and b0, with standard
	// errors.
	Slope       float64 `json:"slope"`
	SlopeSE     float64 `json:"slope_se"`
	Intercept   float64 `json:"intercept"`
	InterceptSE float64 `json:"intercept_se"`
	// BetweenInterceptVar, BetweenSlopeVar and BetweenCov are Psi: the
	// between-subject variance of intercepts (y units squared), of slopes,
	// and their covariance.
	BetweenInterceptVar float64 `json:"between_intercept_var"`
	BetweenSlopeVar     float64 `json:"between_slope_var"`
	BetweenCov          float64 `json:"between_cov"`
	// WithinVar is the residual (within-subject) variance.
	WithinVar float64 `json:"within_var"`
	// BetweenShare is the between-subject share of the variance of y at the
	// mean x: v_b / (v_b + WithinVar), v_b = Psi00 + 2 Psi01 x + Psi11 x^2.
	BetweenShare float64 `json:"between_share"`
	// REMLCriterion is -2 times the restricted log-likelihood at the fit.
	REMLCriterion float64 `json:"reml_criterion"`
}

// group holds one subject's sufficient statistics for Z = X = [1, x].
type group struct {
	n       int
	a       [2][2]float64 // Z'Z
	b       [2]float64    // Z'y
	c       float64       // y'y
	meanX   float64
	sumX    float64
	members int
}

// FitMixed fits the model to points grouped by subject (xs[g], ys[g]);
// pairs with a non-finite value are left out. It needs 2 subjects and 4
// points at least.
func FitMixed(xs, ys [][]float64) MixedFit {
	nan := math.NaN()
	out := MixedFit{Slope: nan, SlopeSE: nan, Intercept: nan, InterceptSE: nan, BetweenInterceptVar: nan,
		BetweenSlopeVar: nan, BetweenCov: nan, WithinVar: nan, BetweenShare: nan, REMLCriterion: nan}
	var gs []group
	var sumX float64
	for g := range xs {
		var gr group
		for i := range xs[g] {
			x, y := xs[g][i], ys[g][i]
			if !finite(x) || !finite(y) {
				continue
			}
			gr.n++
			gr.a[0][0]++
			gr.a[0][1] += x
			gr.a[1][1] += x * x
			gr.b[0] += y
			gr.b[1] += x * y
			gr.c += y * y
			sumX += x
		}
		gr.a[1][0] = gr.a[0][1]
		if gr.n > 0 {
			gs = append(gs, gr)
			out.N += gr.n
		}
	}
	out.Subjects = len(gs)
	if out.Subjects < 2 || out.N < 4 {
		return out
	}
	const p = 2
	// eval returns -2 log REML likelihood (without its constant) for the
	// relative factor L = [[l0, 0], [l1, l2]] of Psi / sigma^2, with the
	// fixed effects, sigma^2 and (X' V^-1 X)^-1 (sigma^2 V = the covariance
	// of y). Per subject, with Z = X = [1, x] and A = Z'Z, b = Z'y:
	// M = I + L'AL, G = L M^-1 L', X'V^-1X = A - AGA, X'V^-1y = b - AGb,
	// y'V^-1y = c - b'Gb and log|V| = log|M| (Woodbury).
	eval := func(l [3]float64) (crit float64, beta [2]float64, sigma2 float64, pinv m2) {
		L := m2{l[0], 0, l[1], l[2]}
		var P m2
		var q [2]float64
		var r, logdetM float64
		for _, g := range gs {
			A := m2{g.a[0][0], g.a[0][1], g.a[1][0], g.a[1][1]}
			M := L.t().mul(A).mul(L).add(m2{1, 0, 0, 1})
			Minv, det := M.inv()
			if !(det > 0) {
				return math.Inf(1), beta, 0, pinv
			}
			logdetM += math.Log(det)
			G := L.mul(Minv).mul(L.t())
			AG := A.mul(G)
			P = P.add(A.sub(AG.mul(A)))
			agb := AG.vec(g.b)
			q[0] += g.b[0] - agb[0]
			q[1] += g.b[1] - agb[1]
			gb := G.vec(g.b)
			r += g.c - (g.b[0]*gb[0] + g.b[1]*gb[1])
		}
		pinv, detP := P.inv()
		if !(detP > 0) {
			return math.Inf(1), beta, 0, pinv
		}
		beta = pinv.vec(q)
		rss := r - (q[0]*beta[0] + q[1]*beta[1])
		if !(rss > 0) {
			return math.Inf(1), beta, 0, pinv
		}
		df := float64(out.N - p)
		sigma2 = rss / df
		crit = df*math.Log(sigma2) + logdetM + math.Log(detP)
		return crit, beta, sigma2, pinv
	}
	f := func(v []float64) float64 {
		c, _, _, _ := eval([3]float64{v[0], v[1], v[2]})
		if math.IsNaN(c) {
			return math.Inf(1)
		}
		return c
	}
	best := math.Inf(1)
	var bestL [3]float64
	// Several starts (relative SDs of intercept and slope); Nelder-Mead
	// from each, the lowest criterion kept.
	for _, s0 := range []float64{0.3, 3} {
		for _, s1 := range []float64{0.003, 0.03} {
			res, err := optimize.Minimize(optimize.Problem{Func: f}, []float64{s0, 0, s1},
				&optimize.Settings{FuncEvaluations: 4000, Converger: &optimize.FunctionConverge{Absolute: 1e-12, Iterations: 200}},
				&optimize.NelderMead{})
			if err != nil && res == nil {
				continue
			}
			if res.F < best {
				best = res.F
				bestL = [3]float64{res.X[0], res.X[1], res.X[2]}
			}
		}
	}
	if math.IsInf(best, 0) {
		return out
	}
	crit, beta, s2, pinv := eval(bestL)
	out.REMLCriterion = crit + float64(out.N-p)*(1+math.Log(2*math.Pi))
	out.Intercept, out.Slope = beta[0], beta[1]
	out.InterceptSE, out.SlopeSE = math.Sqrt(s2*pinv[0]), math.Sqrt(s2*pinv[3])
	l0, l1, l2 := bestL[0], bestL[1], bestL[2]
	out.BetweenInterceptVar = s2 * l0 * l0
	out.BetweenCov = s2 * l0 * l1
	out.BetweenSlopeVar = s2 * (l1*l1 + l2*l2)
	out.WithinVar = s2
	mx := sumX / float64(out.N)
	vb := out.BetweenInterceptVar + 2*out.BetweenCov*mx + out.BetweenSlopeVar*mx*mx
	out.BetweenShare = vb / (vb + s2)
	return out
}

// m2 is a 2 x 2 matrix, row-major.
type m2 [4]float64

func (a m2) mul(b m2) m2 {
	return m2{a[0]*b[0] + a[1]*b[2], a[0]*b[1] + a[1]*b[3], a[2]*b[0] + a[3]*b[2], a[2]*b[1] + a[3]*b[3]}
}
func (a m2) add(b m2) m2 { return m2{a[0] + b[0], a[1] + b[1], a[2] + b[2], a[3] + b[3]} }
func (a m2) sub(b m2) m2 { return m2{a[0] - b[0], a[1] - b[1], a[2] - b[2], a[3] - b[3]} }
func (a m2) t() m2       { return m2{a[0], a[2], a[1], a[3]} }
func (a m2) vec(v [2]float64) [2]float64 {
	return [2]float64{a[0]*v[0] + a[1]*v[1], a[2]*v[0] + a[3]*v[1]}
}

// inv returns the inverse and the determinant.
func (a m2) inv() (m2, float64) {
	d := a[0]*a[3] - a[1]*a[2]
	if d == 0 {
		return m2{}, 0
	}
	return m2{a[3] / d, -a[1] / d, -a[2] / d, a[0] / d}, d
}
