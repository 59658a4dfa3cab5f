package study

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// MixedFit is a linear mixed model y = b0 + b1 x + u0 + u1 x + e with a
// random intercept u0 and a random slope u1 per subject ((u0, u1) normal
// with covariance Psi, e normal with variance WithinVar), fitted by
// restricted maximum likelihood; over several target levels b0 is one
// fixed intercept per level (FitMixedLevels). Unknown figures are NaN.
type MixedFit struct {
	Subjects int `json:"subjects"`
	N        int `json:"n"`
	// Slope and Intercept are the fixed effects b1 and b0, with standard
	// errors given the variance estimates: sqrt of the diagonal of
	// sigma^2 (X' V^-1 X)^-1 (statsmodels' bse_fe, from the inverse
	// Hessian over the variance parameters too, are a few per cent larger).
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
	// Levels are the per-level fixed intercepts of the model over all
	// levels (FitMixedLevels); empty for one level.
	Levels []LevelIntercept `json:"level_intercepts,omitempty"`
}

// LevelIntercept is the fixed intercept of one target level in the model
// over all levels (FitMixedLevels).
type LevelIntercept struct {
	LevelPct    float64 `json:"level_pct_mvc"`
	Intercept   float64 `json:"intercept"`
	InterceptSE float64 `json:"intercept_se"`
}

// group holds one subject's sufficient statistics for the random-effects
// design Z = [1, x] and the fixed-effects design X (p columns).
type group struct {
	n  int
	zz m2           // Z'Z
	zx [2][]float64 // Z'X, 2 x p
	xx []float64    // X'X, p x p row-major
	zy [2]float64   // Z'y
	xy []float64    // X'y
	yy float64      // y'y
}

// FitMixed fits the model with fixed effects [1, x] to points grouped by
// subject (xs[g], ys[g]); pairs with a non-finite value are left out. It
// needs 2 subjects and 4 points at least.
func FitMixed(xs, ys [][]float64) MixedFit {
	return fitMixed(xs, ys, nil)
}

// FitMixedLevels fits y = b_level + b1 x + u0 + u1 x + e over several
// target levels: one fixed intercept per level (levels[g][i] is point i's
// level, % MVC), one common fixed slope, and the random intercept and
// slope per subject of FitMixed. Pooling levels without their own
// intercepts would count the rise of rate with contraction level as
// within-subject scatter. The result's Intercept and InterceptSE are NaN;
// Levels holds the per-level intercepts, lowest level first.
func FitMixedLevels(xs, ys, levels [][]float64) MixedFit {
	return fitMixed(xs, ys, levels)
}

func fitMixed(xs, ys, levels [][]float64) MixedFit {
	nan := math.NaN()
	out := MixedFit{Slope: nan, SlopeSE: nan, Intercept: nan, InterceptSE: nan, BetweenInterceptVar: nan,
		BetweenSlopeVar: nan, BetweenCov: nan, WithinVar: nan, BetweenShare: nan, REMLCriterion: nan}
	// The fixed-effects columns: an intercept per level (one when levels
	// is nil), then x.
	var lv []float64
	col := map[float64]int{}
	if levels != nil {
		for g := range levels {
			for i, l := range levels[g] {
				if finite(xs[g][i]) && finite(ys[g][i]) && finite(l) {
					if _, ok := col[l]; !ok {
						col[l] = 0
						lv = append(lv, l)
					}
				}
			}
		}
		sort.Float64s(lv)
		for i, l := range lv {
			col[l] = i
		}
	} else {
		lv = []float64{nan}
	}
	p := len(lv) + 1
	row := make([]float64, p)
	var gs []group
	var sumX float64
	for g := range xs {
		gr := group{xx: make([]float64, p*p), xy: make([]float64, p)}
		gr.zx[0], gr.zx[1] = make([]float64, p), make([]float64, p)
		for i := range xs[g] {
			x, y := xs[g][i], ys[g][i]
			if !finite(x) || !finite(y) || levels != nil && !finite(levels[g][i]) {
				continue
			}
			clear(row)
			if levels != nil {
				row[col[levels[g][i]]] = 1
			} else {
				row[0] = 1
			}
			row[p-1] = x
			gr.n++
			gr.zz = gr.zz.add(m2{1, x, x, x * x})
			for j, v := range row {
				gr.zx[0][j] += v
				gr.zx[1][j] += x * v
				gr.xy[j] += v * y
				for k, w := range row {
					gr.xx[j*p+k] += v * w
				}
			}
			gr.zy[0] += y
			gr.zy[1] += x * y
			gr.yy += y * y
			sumX += x
		}
		if gr.n > 0 {
			gs = append(gs, gr)
			out.N += gr.n
		}
	}
	out.Subjects = len(gs)
	if out.Subjects < 2 || out.N < p+2 {
		return out
	}
	// eval returns -2 log REML likelihood (without its constant) for the
	// relative factor L = [[l0, 0], [l1, l2]] of Psi / sigma^2, with the
	// fixed effects, sigma^2 and (X' V^-1 X)^-1 (sigma^2 V = the covariance
	// of y). Per subject, with A = Z'Z, M = I + L'AL and G = L M^-1 L'
	// (Woodbury: V^-1 = I - Z G Z'): X'V^-1X = X'X - (Z'X)'G(Z'X),
	// X'V^-1y = X'y - (Z'X)'G Z'y, y'V^-1y = y'y - (Z'y)'G Z'y and
	// log|V| = log|M|.
	eval := func(l [3]float64) (crit float64, beta []float64, sigma2 float64, pinv *mat.SymDense) {
		L := m2{l[0], 0, l[1], l[2]}
		P := mat.NewSymDense(p, nil)
		q := make([]float64, p)
		var r, logdetM float64
		for _, g := range gs {
			M := L.t().mul(g.zz).mul(L).add(m2{1, 0, 0, 1})
			Minv, det := M.inv()
			if !(det > 0) {
				return math.Inf(1), nil, 0, nil
			}
			logdetM += math.Log(det)
			G := L.mul(Minv).mul(L.t())
			// gz = G Z'X (2 x p), gy = G Z'y.
			var gz [2][]float64
			for a := 0; a < 2; a++ {
				gz[a] = make([]float64, p)
				for j := 0; j < p; j++ {
					gz[a][j] = G[2*a]*g.zx[0][j] + G[2*a+1]*g.zx[1][j]
				}
			}
			gy := G.vec(g.zy)
			for j := 0; j < p; j++ {
				for k := j; k < p; k++ {
					P.SetSym(j, k, P.At(j, k)+g.xx[j*p+k]-(g.zx[0][j]*gz[0][k]+g.zx[1][j]*gz[1][k]))
				}
				q[j] += g.xy[j] - (g.zx[0][j]*gy[0] + g.zx[1][j]*gy[1])
			}
			r += g.yy - (g.zy[0]*gy[0] + g.zy[1]*gy[1])
		}
		var ch mat.Cholesky
		if !ch.Factorize(P) {
			return math.Inf(1), nil, 0, nil
		}
		pinv = mat.NewSymDense(p, nil)
		if err := ch.InverseTo(pinv); err != nil {
			return math.Inf(1), nil, 0, nil
		}
		var bv mat.VecDense
		bv.MulVec(pinv, mat.NewVecDense(p, q))
		beta = bv.RawVector().Data
		rss := r
		for j := range q {
			rss -= q[j] * beta[j]
		}
		if !(rss > 0) {
			return math.Inf(1), nil, 0, nil
		}
		df := float64(out.N - p)
		sigma2 = rss / df
		crit = df*math.Log(sigma2) + logdetM + ch.LogDet()
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
	out.Slope, out.SlopeSE = beta[p-1], math.Sqrt(s2*pinv.At(p-1, p-1))
	if levels == nil {
		out.Intercept, out.InterceptSE = beta[0], math.Sqrt(s2*pinv.At(0, 0))
	} else {
		for i, l := range lv {
			out.Levels = append(out.Levels, LevelIntercept{LevelPct: l, Intercept: beta[i], InterceptSE: math.Sqrt(s2 * pinv.At(i, i))})
		}
	}
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
