package study

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"strconv"
	"testing"

	"muarc/internal/reftest"
)

// refCase is one generated data set: points per subject.
type refCase struct {
	X [][]float64 `json:"x"`
	Y [][]float64 `json:"y"`
}

// makeCases generates rate-versus-threshold-like data sets: per subject a
// random intercept (about 25 pps) and slope (about -0.4 pps/% MVC), 6-18
// units with thresholds 1-45 % MVC, residual SD 1-3 pps. The values are
// inputs only; the check values come from statsmodels.
func makeCases(n int) []refCase {
	rng := rand.New(rand.NewPCG(11, 13))
	var out []refCase
	for c := 0; c < n; c++ {
		var rc refCase
		subjects := 3 + rng.IntN(5)
		b0, b1 := 20+10*rng.Float64(), -0.2-0.5*rng.Float64()
		sd0, sd1, sde := 1+3*rng.Float64(), 0.05+0.15*rng.Float64(), 1+2*rng.Float64()
		for s := 0; s < subjects; s++ {
			u0, u1 := sd0*rng.NormFloat64(), sd1*rng.NormFloat64()
			var xs, ys []float64
			for k := 6 + rng.IntN(13); k > 0; k-- {
				x := 1 + 44*rng.Float64()
				xs = append(xs, x)
				ys = append(ys, b0+u0+(b1+u1)*x+sde*rng.NormFloat64())
			}
			rc.X, rc.Y = append(rc.X, xs), append(rc.Y, ys)
		}
		out = append(out, rc)
	}
	return out
}

const statsmodelsScript = `
import sys, json, warnings
import numpy as np
import statsmodels.api as sm
warnings.simplefilter("ignore")
cases = json.load(sys.stdin)
out = []
for c in cases:
    ols = []
    for x, y in zip(c["x"], c["y"]):
        X = sm.add_constant(np.asarray(x))
        r = sm.OLS(np.asarray(y), X).fit()
        lo, hi = r.conf_int(0.05)[1]
        ols.append([r.params[1], r.params[0], r.rsquared, r.bse[1], lo, hi])
    x = np.concatenate([np.asarray(v) for v in c["x"]])
    y = np.concatenate([np.asarray(v) for v in c["y"]])
    g = np.concatenate([[i] * len(v) for i, v in enumerate(c["x"])])
    X = sm.add_constant(x)
    m = sm.MixedLM(y, X, groups=g, exog_re=X).fit(reml=True, method=["lbfgs", "powell"])
    cr = np.asarray(m.cov_re)
    out.append({"ols": ols, "fe": [m.fe_params[0], m.fe_params[1]],
                "cov_re": [cr[0, 0], cr[0, 1], cr[1, 1]], "scale": m.scale, "llf": m.llf, "converged": bool(m.converged)})
print(json.dumps(out))
`

// TestAgainstStatsmodels fits the same generated points with FitLine and
// FitMixed and with statsmodels (Debian python3-statsmodels: OLS and MixedLM
// with a random intercept and slope per group, REML).
func TestAgainstStatsmodels(t *testing.T) {
	cases := makeCases(30)
	var ref []struct {
		OLS   [][6]float64 `json:"ols"`
		FE    [2]float64   `json:"fe"`
		Conv  bool         `json:"converged"`
		CovRe [3]float64   `json:"cov_re"`
		Scale float64      `json:"scale"`
		LLF   float64      `json:"llf"`
	}
	runStatsmodels(t, statsmodelsScript, cases, &ref)
	var worstOLS, worstFE, worstVar, worstLL float64
	compared, unconverged := 0, 0
	for ci, c := range cases {
		r := ref[ci]
		for s := range c.X {
			f := FitLine(c.X[s], c.Y[s])
			got := [6]float64{f.Slope, f.Intercept, f.R2, f.SlopeSE, f.SlopeCILow, f.SlopeCIHigh}
			for k := range got {
				worstOLS = math.Max(worstOLS, relDiff(got[k], r.OLS[s][k]))
			}
		}
		m := FitMixed(c.X, c.Y)
		// statsmodels' llf is the REML log-likelihood: -criterion/2. Our
		// optimum is never worse than statsmodels'.
		if -m.REMLCriterion/2 < r.LLF-1e-3 {
			t.Errorf("case %d: our REML log-likelihood %.6f is below statsmodels' %.6f", ci, -m.REMLCriterion/2, r.LLF)
		}
		// Where statsmodels stopped at a lower likelihood than ours (a
		// worse local optimum, converged or not) the estimates differ by
		// design; the rest are the same optimum and are compared.
		if !r.Conv || -m.REMLCriterion/2 > r.LLF+1e-3 {
			unconverged++
			continue
		}
		compared++
		worstFE = math.Max(worstFE, math.Max(relDiff(m.Intercept, r.FE[0]), relDiff(m.Slope, r.FE[1])))
		// Variance components relative to the total they belong to: an
		// estimate near zero differs between optimizers in absolute terms.
		tot := m.BetweenInterceptVar + r.Scale
		worstVar = math.Max(worstVar, math.Abs(m.BetweenInterceptVar-r.CovRe[0])/tot)
		worstVar = math.Max(worstVar, math.Abs(m.WithinVar-r.Scale)/tot)
		worstVar = math.Max(worstVar, math.Abs(m.BetweenSlopeVar-r.CovRe[2])/(r.CovRe[2]+r.Scale/1000))
		worstLL = math.Max(worstLL, math.Abs(-m.REMLCriterion/2-r.LLF))
	}
	t.Logf("largest differences: OLS over %d cases rel %.2g; mixed model over the %d cases where statsmodels reached our optimum (in %d it stopped lower or did not converge): fixed effects rel %.2g, variance components %.2g, REML log-likelihood %.2g",
		len(cases), worstOLS, compared, unconverged, worstFE, worstVar, worstLL)
	if compared < len(cases)/2 {
		t.Errorf("statsmodels reached our optimum in only %d of %d cases", compared, len(cases))
	}
	// Tolerances: OLS is closed form (1e-6 relative, the CI bounds of a slope near zero); the mixed model is an
	// optimisation in both (Nelder-Mead here, L-BFGS/Powell there).
	if worstOLS > 1e-6 {
		t.Errorf("OLS differs from statsmodels by %.3g (relative)", worstOLS)
	}
	if worstFE > 2e-3 || worstVar > 2e-2 || worstLL > 1e-3 {
		t.Errorf("mixed model differs from statsmodels: fixed %.3g, variances %.3g, log-likelihood %.3g", worstFE, worstVar, worstLL)
	}
}

// runStatsmodels runs script under Debian's python3 with statsmodels,
// cases as JSON on its stdin, and decodes its JSON answer into ref.
func runStatsmodels(t *testing.T, script string, cases, ref any) {
	t.Helper()
	py := reftest.NeedPython(t, "statsmodels")
	in, _ := json.Marshal(cases)
	cmd := exec.Command(py, "-c", script)
	cmd.Stdin = bytes.NewReader(in)
	b, err := cmd.Output()
	if err != nil {
		t.Fatalf("statsmodels: %v", err)
	}
	if err := json.Unmarshal(b, ref); err != nil {
		t.Fatalf("%v: %s", err, b)
	}
}

func relDiff(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / math.Max(math.Abs(b), 1e-12)
}

// levelCase is one generated data set over several target levels: points
// per subject with each point's level.
type levelCase struct {
	X [][]float64 `json:"x"`
	Y [][]float64 `json:"y"`
	L [][]float64 `json:"l"`
}

// makeLevelCases generates rate-versus-threshold-like sets over 2 or 3
// target levels: an intercept per level that rises with the level, one
// common slope, a random intercept and slope per subject, thresholds from
// near 0 to about the level; some subjects miss a level. Inputs only: the
// check values come from statsmodels.
func makeLevelCases(n int, seed uint64) []levelCase {
	rng := rand.New(rand.NewPCG(seed, 17))
	var out []levelCase
	for c := 0; c < n; c++ {
		var lc levelCase
		levels := []float64{10, 30, 50}
		if rng.IntN(3) == 0 {
			levels = []float64{20, 60}
		}
		b1 := -0.2 - 0.6*rng.Float64()
		base := map[float64]float64{}
		for _, l := range levels {
			base[l] = 8 + 0.5*l + 3*rng.Float64()
		}
		sd0, sd1, sde := 0.5+2*rng.Float64(), 0.02+0.1*rng.Float64(), 0.5+1.5*rng.Float64()
		for s, subjects := 0, 3+rng.IntN(5); s < subjects; s++ {
			u0, u1 := sd0*rng.NormFloat64(), sd1*rng.NormFloat64()
			var xs, ys, ls []float64
			for li, l := range levels {
				if li > 0 && rng.IntN(6) == 0 {
					continue // this subject has no trial at the level
				}
				for k := 4 + rng.IntN(10); k > 0; k-- {
					x := 0.5 + 0.9*l*rng.Float64()
					xs, ls = append(xs, x), append(ls, l)
					ys = append(ys, base[l]+u0+(b1+u1)*x+sde*rng.NormFloat64())
				}
			}
			lc.X, lc.Y, lc.L = append(lc.X, xs), append(lc.Y, ys), append(lc.L, ls)
		}
		out = append(out, lc)
	}
	return out
}

// statsmodelsLevels fits MixedLM with fixed effects one indicator column
// per level (sorted) plus the threshold, and a random intercept and slope
// per subject (exog_re [1, x]), by REML: the formula
// rate ~ 0 + C(level) + threshold, re_formula ~threshold.
const statsmodelsLevels = `
import sys, json, warnings
import numpy as np
import statsmodels.api as sm
warnings.simplefilter("ignore")
out = []
for c in json.load(sys.stdin):
    x = np.concatenate([np.asarray(v, float) for v in c["x"]])
    y = np.concatenate([np.asarray(v, float) for v in c["y"]])
    l = np.concatenate([np.asarray(v, float) for v in c["l"]])
    g = np.concatenate([[i] * len(v) for i, v in enumerate(c["x"])])
    lv = sorted(set(l.tolist()))
    X = np.column_stack([(l == v).astype(float) for v in lv] + [x])
    Z = np.column_stack([np.ones_like(x), x])
    m = sm.MixedLM(y, X, groups=g, exog_re=Z).fit(reml=True, method=["lbfgs", "powell"])
    cr = np.asarray(m.cov_re)
    # The fixed effects' standard errors given the variance estimates,
    # sqrt(diag((X' V^-1 X)^-1)) with V = Z cov_re Z' + scale I per
    # subject (numpy on statsmodels' estimates; statsmodels' own bse_fe
    # come from the inverse Hessian over every parameter and are larger).
    xvx = np.zeros((X.shape[1], X.shape[1]))
    for gi in np.unique(g):
        s = g == gi
        V = Z[s] @ cr @ Z[s].T + m.scale * np.eye(s.sum())
        xvx += X[s].T @ np.linalg.solve(V, X[s])
    se = np.sqrt(np.diag(np.linalg.inv(xvx)))
    vals = list(map(float, m.fe_params)) + list(map(float, se)) + [cr[0, 0], cr[0, 1], cr[1, 1], float(m.scale), float(m.llf)]
    # A fit with a non-finite figure (an infinite likelihood, a NaN
    # standard error) is counted as not converged.
    ok = bool(m.converged) and all(np.isfinite(vals))
    fin = lambda v: float(v) if np.isfinite(v) else 0.0
    out.append({"fe": [fin(v) for v in m.fe_params], "bse": [fin(v) for v in se],
                "cov_re": [fin(cr[0, 0]), fin(cr[0, 1]), fin(cr[1, 1])], "scale": fin(m.scale), "llf": fin(m.llf), "converged": ok})
print(json.dumps(out))
`

// TestLevelsAgainstStatsmodels is the differential test of FitMixedLevels
// (one fixed intercept per level, a common slope, random intercept and
// slope per subject) against statsmodels' MixedLM (Debian
// python3-statsmodels) on the same generated sets and the same design:
// fixed effects, their standard errors given the variance estimates (numpy
// on statsmodels' estimates), variance components and the REML
// log-likelihood. MUARC_MIXED_CASES sets the number of sets (default 30;
// make fuzz runs 400).
func TestLevelsAgainstStatsmodels(t *testing.T) {
	n := 30
	if v, err := strconv.Atoi(os.Getenv("MUARC_MIXED_CASES")); err == nil && v > 0 {
		n = v
	}
	cases := makeLevelCases(n, 23)
	var ref []struct {
		FE    []float64  `json:"fe"`
		BSE   []float64  `json:"bse"`
		Conv  bool       `json:"converged"`
		CovRe [3]float64 `json:"cov_re"`
		Scale float64    `json:"scale"`
		LLF   float64    `json:"llf"`
	}
	runStatsmodels(t, statsmodelsLevels, cases, &ref)
	var worstFE, worstSE, worstVar, worstLL float64
	compared := 0
	for ci, c := range cases {
		r := ref[ci]
		m := FitMixedLevels(c.X, c.Y, c.L)
		if len(m.Levels)+1 != len(r.FE) {
			t.Fatalf("case %d: %d level intercepts, statsmodels has %d fixed effects", ci, len(m.Levels), len(r.FE))
		}
		ll := -m.REMLCriterion / 2
		if r.Conv && ll < r.LLF-1e-3 {
			t.Errorf("case %d: our REML log-likelihood %.6f is below statsmodels' %.6f", ci, ll, r.LLF)
		}
		if !r.Conv || ll > r.LLF+1e-3 {
			continue // statsmodels stopped at a worse optimum: estimates differ by design
		}
		compared++
		got := []float64{}
		gotSE := []float64{}
		for _, li := range m.Levels {
			got, gotSE = append(got, li.Intercept), append(gotSE, li.InterceptSE)
		}
		got, gotSE = append(got, m.Slope), append(gotSE, m.SlopeSE)
		for k := range got {
			worstFE = math.Max(worstFE, relDiff(got[k], r.FE[k]))
			worstSE = math.Max(worstSE, relDiff(gotSE[k], r.BSE[k]))
		}
		tot := m.BetweenInterceptVar + r.Scale
		worstVar = math.Max(worstVar, math.Abs(m.BetweenInterceptVar-r.CovRe[0])/tot)
		worstVar = math.Max(worstVar, math.Abs(m.WithinVar-r.Scale)/tot)
		worstVar = math.Max(worstVar, math.Abs(m.BetweenSlopeVar-r.CovRe[2])/(r.CovRe[2]+r.Scale/1000))
		worstLL = math.Max(worstLL, math.Abs(ll-r.LLF))
	}
	t.Logf("%d sets, %d where statsmodels converged to our optimum: fixed effects rel %.2g, their SEs rel %.2g, variance components %.2g, REML log-likelihood %.2g",
		len(cases), compared, worstFE, worstSE, worstVar, worstLL)
	if compared < len(cases)/2 {
		t.Errorf("statsmodels reached our optimum in only %d of %d sets", compared, len(cases))
	}
	// Tolerances: both sides optimise numerically (Nelder-Mead here,
	// L-BFGS then Powell there).
	if worstFE > 2e-3 || worstSE > 2e-2 || worstVar > 2e-2 || worstLL > 1e-3 {
		t.Errorf("differs from statsmodels: fixed %.3g, SE %.3g, variances %.3g, log-likelihood %.3g", worstFE, worstSE, worstVar, worstLL)
	}
}
