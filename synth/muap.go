package synth

import (
	"math"
	"math/rand/v2"
)

// grid is an electrode array's geometry: channel k sits at row pos[k][0],
// column pos[k][1]; electrode centres are ied mm apart, x along columns,
// y along rows. Muscle fibres run along y.
type grid struct {
	rows, cols int
	ied        float64
	pos        [][2]int
}

func (g grid) xy(k int) (x, y float64) {
	return float64(g.pos[k][1]) * g.ied, float64(g.pos[k][0]) * g.ied
}

// templateShape fixes the template window of one sampling rate.
type templateShape struct {
	rateHz         float64
	firstLag, lags int
}

// MUAP window: 6 ms before the discharge to 23 ms after it (29 ms).
const (
	muapPreS  = 0.006
	muapPostS = 0.023
)

func newTemplateShape(rateHz float64) templateShape {
	pre := int(math.Round(muapPreS * rateHz))
	post := int(math.Round(muapPostS * rateHz))
	return templateShape{rateHz: rateHz, firstLag: -pre, lags: pre + post}
}

// muapModel is a unit's MUAP: a triphasic (negative Ricker) wave started at
// the innervation point (x0, y0) that propagates both ways along the fibres
// (y) at velocity mm/ms, so its latency grows with |y - y0|/velocity; its
// amplitude falls off across the fibres as a Gaussian of width lambda and
// slowly along them, and it widens with propagation distance.
type muapModel struct {
	x0, y0   float64 // innervation point, mm in the array frame
	ampUV    float64 // peak amplitude at the innervation point, uV
	velocity float64 // conduction velocity, mm/ms (= m/s)
	sigmaMs  float64 // wave width at the innervation point, ms
	lambdaMm float64 // cross-fibre fall-off, mm
}

func randomMUAP(rng *rand.Rand, g grid, ampUV float64) muapModel {
	h := float64(g.rows-1) * g.ied
	w := float64(g.cols-1) * g.ied
	return muapModel{
		x0:       -0.5*g.ied + rng.Float64()*(w+g.ied),
		y0:       h*0.35 + rng.Float64()*h*0.3,
		ampUV:    ampUV,
		velocity: 3.8 + 1.2*rng.Float64(),
		sigmaMs:  1.6 + 0.6*rng.Float64(),
		lambdaMm: 10 + 8*rng.Float64(),
	}
}

// template returns the MUAP sampled on the template window, [lag][channel],
// uV, with a cosine taper over the first and last 2 ms.
func (m muapModel) template(g grid, sh templateShape) []float32 {
	ch := len(g.pos)
	out := make([]float32, sh.lags*ch)
	taper := 0.002 * sh.rateHz
	for c := range ch {
		x, y := g.xy(c)
		dx := x - m.x0
		dy := math.Abs(y - m.y0)
		spatial := math.Exp(-dx*dx/(2*m.lambdaMm*m.lambdaMm)) / (1 + (dy/40)*(dy/40))
		disp := 1 + dy/150
		sigma := m.sigmaMs * disp
		amp := m.ampUV * spatial / math.Sqrt(disp)
		lat := dy / m.velocity // ms
		for l := range sh.lags {
			tms := float64(l+sh.firstLag) / sh.rateHz * 1000
			u := (tms - lat) / sigma
			v := -amp * (1 - u*u) * math.Exp(-u*u/2)
			if f := float64(l); f < taper {
				v *= 0.5 - 0.5*math.Cos(math.Pi*f/taper)
			} else if f := float64(sh.lags - 1 - l); f < taper {
				v *= 0.5 - 0.5*math.Cos(math.Pi*f/taper)
			}
			out[l*ch+c] = float32(v)
		}
	}
	return out
}

// peakToPeak returns the largest per-channel peak-to-peak value of a
// [lag][channel] template, uV.
func peakToPeak(t []float32, ch int) float64 {
	best := 0.0
	for c := range ch {
		lo, hi := math.Inf(1), math.Inf(-1)
		for l := c; l < len(t); l += ch {
			v := float64(t[l])
			lo, hi = min(lo, v), max(hi, v)
		}
		best = max(best, hi-lo)
	}
	return best
}

// clampN is a standard normal variate clipped to [-lim, lim].
func clampN(rng *rand.Rand, lim float64) float64 {
	return max(-lim, min(lim, rng.NormFloat64()))
}
