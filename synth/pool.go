package synth

// The motor-unit pool of one array: thresholds, rates, the force they make
// together, and the excitation that gives a target force.

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"strconv"

	"muarc/record"
)

// poolUnit is one simulated motor unit of a muscle.
type poolUnit struct {
	rtPct   float64 // recruitment threshold, steady-state force, % MVC
	drtPct  float64 // derecruitment threshold, % MVC
	rte     float64 // excitation threshold, %
	dre     float64 // excitation below which a discharging unit stops, %
	r0, rpk float64 // rate at recruitment and ceiling, pps
	gain    float64 // pps per % excitation
	cov     float64 // ISI jitter CoV
	tcS     float64 // twitch contraction time, s
	peakRel float64 // relative twitch peak
	muap    muapModel
	tmpl    []float32 // [lag][channel], uV
	energy  float64   // sum of squares of tmpl, uV^2
	p2p     float64   // uV
	quality float64   // 0..1, amplitude rank on a log scale
}

// rate is the steady-state discharge rate at excitation e (%), pps; 0
// below the threshold.
func (u *poolUnit) rate(e float64) float64 {
	if e < u.rte {
		return 0
	}
	return min(u.r0+u.gain*(e-u.rte), u.rpk)
}

// derecruitAt is the excitation (%) below which a discharging unit stops.
func (u *poolUnit) derecruitAt() float64 { return u.dre }

// firingRate is the rate of a unit that is discharging at excitation e:
// above the threshold as rate, below it falling with the same gain, to at
// most derecruitSlowPPS under the initial rate.
func (u *poolUnit) firingRate(e float64) float64 {
	if e >= u.rte {
		return u.rate(e)
	}
	return max(u.r0-derecruitSlowPPS, u.r0+u.gain*(e-u.rte))
}

type arrayPlan struct {
	spec     ArraySpec
	site     Site
	grid     grid
	channels []record.Channel
	units    []poolUnit
}

func makeGrid(a ArraySpec) (grid, []record.Channel) {
	g := grid{rows: a.Rows, cols: a.Columns, ied: a.IEDMm}
	for r := range a.Rows {
		for c := range a.Columns {
			if a.SkipCorner && r == 0 && c == 0 {
				continue
			}
			g.pos = append(g.pos, [2]int{r, c})
		}
	}
	width := len(strconv.Itoa(len(g.pos)))
	width = max(width, 2)
	chans := make([]record.Channel, len(g.pos))
	for k := range g.pos {
		x, y := g.xy(k)
		chans[k] = record.Channel{Label: fmt.Sprintf("e%0*d", width, k+1),
			Row: g.pos[k][0], Column: g.pos[k][1], XMm: x, YMm: y, Usable: k != a.BadChannel}
	}
	return g, chans
}

func makePool(rng *rand.Rand, n int, g grid, sh templateShape, maxRT float64) []poolUnit {
	if !(maxRT > 0) {
		maxRT = defaultMaxThreshold
	}
	rt := make([]float64, n)
	for i := range rt {
		f := (float64(i) + 0.3*(rng.Float64()-0.5)) / float64(n-1)
		rt[i] = thresholdMinPct * math.Exp(math.Log(maxRT/thresholdMinPct)*max(0, min(1, f)))
	}
	sort.Float64s(rt)
	us := make([]poolUnit, n)
	for i := range us {
		f := float64(i) / float64(n-1)
		u := poolUnit{rtPct: rt[i], rte: rt[i], dre: rt[i] / 2}
		u.drtPct = max(derecruitMinFrac*rt[i], derecruitFrac*rt[i]-derecruitOffPct)
		// 6-10 pps at recruitment (common practice), a ceiling falling
		// from 35 pps for the earliest units to about 19 pps for the last.
		u.r0 = 7.0 + 0.5*clampN(rng, 2)
		u.rpk = max(u.r0+4, 35-16*rt[i]/maxRT+clampN(rng, 2))
		u.rpk = min(u.rpk, 35)
		u.gain = rateGainPPS * (1 + 0.08*clampN(rng, 2))
		u.cov = 0.12 + 0.07*rng.Float64()
		u.tcS = max(30, min(100, 90-55*f+3*clampN(rng, 2))) / 1000
		u.peakRel = math.Exp(math.Log(12)*f) * (1 + 0.1*clampN(rng, 2))
		amp := 50 * math.Exp(math.Log(5)*f) * (1 + 0.15*clampN(rng, 2))
		u.muap = randomMUAP(rng, g, amp)
		u.tmpl = u.muap.template(g, sh)
		for _, v := range u.tmpl {
			u.energy += float64(v) * float64(v)
		}
		u.p2p = peakToPeak(u.tmpl, len(g.pos))
		us[i] = u
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, u := range us {
		lo, hi = min(lo, math.Log(u.p2p)), max(hi, math.Log(u.p2p))
	}
	for i := range us {
		if hi > lo {
			us[i].quality = (math.Log(us[i].p2p) - lo) / (hi - lo)
		}
	}
	return us
}

// calibrate sets every unit's excitation thresholds so that the
// steady-state force at them is the unit's recruitment and derecruitment
// threshold in % MVC. The force table depends on the thresholds, so the
// mapping is repeated to a fixed point; it returns the final table.
func calibrate(plans []arrayPlan) []float64 {
	tab := steadyForce(plans)
	for range calibrationRounds {
		for a := range plans {
			for k := range plans[a].units {
				u := &plans[a].units[k]
				u.rte = excitationFor(tab, u.rtPct/100)
			}
		}
		tab = steadyForce(plans)
	}
	for a := range plans {
		for k := range plans[a].units {
			u := &plans[a].units[k]
			u.dre = min(u.rte, max(excitationFor(tab, u.drtPct/100), u.rte/4))
		}
	}
	return tab
}

// steadyForce tabulates the steady-state force of all pools (sum of twitch
// peak x contraction time x e x rate) on an excitation grid 0..100 %, in
// model units.
func steadyForce(plans []arrayPlan) []float64 {
	t := make([]float64, excitationSteps+1)
	var full float64
	for _, p := range plans {
		for k := range p.units {
			u := &p.units[k]
			full += u.peakRel * u.tcS * math.E * u.rpk
		}
	}
	bg := backgroundPerPct(full)
	for j := range t {
		e := 100 * float64(j) / excitationSteps
		f := bg * e
		for _, p := range plans {
			for k := range p.units {
				u := &p.units[k]
				f += u.peakRel * u.tcS * math.E * u.rate(e)
			}
		}
		t[j] = f
	}
	return t
}

// backgroundPerPct is the background force per % excitation, in model
// units, for simulated units whose full force is full.
func backgroundPerPct(full float64) float64 {
	return backgroundShare / (1 - backgroundShare) * full / 100
}

// excitationFor returns the excitation (%) whose steady-state force is the
// fraction frac of the maximal (table inverted by bisection + linear
// interpolation).
func excitationFor(tab []float64, frac float64) float64 {
	want := frac * tab[len(tab)-1]
	j := sort.Search(len(tab), func(j int) bool { return tab[j] >= want })
	if j == 0 {
		return 0
	}
	if j >= len(tab) {
		return 100
	}
	a, b := tab[j-1], tab[j]
	x := float64(j - 1)
	if b > a {
		x += (want - a) / (b - a)
	}
	return 100 * x / float64(len(tab)-1)
}

func forceAt(tab []float64, e float64) float64 {
	x := max(0, min(1, e/100)) * float64(len(tab)-1)
	j := int(x)
	if j >= len(tab)-1 {
		return 1
	}
	return (tab[j] + (x-float64(j))*(tab[j+1]-tab[j])) / tab[len(tab)-1]
}
