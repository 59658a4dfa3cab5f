package synth

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strconv"

	"muarc/record"
	"muarc/schema"
)

// Generated is one generated recording (one subject's session) with its
// ground truth.
type Generated struct {
	Recording *record.Recording
	Truth     Truth
}

// Model constants (a property of our model, chosen to give physiological
// figures; see the package doc).
const (
	// Recruitment thresholds (steady-state force at which a unit starts,
	// % MVC) are spread exponentially over the pool, many low-threshold
	// units and few high ones (the exponential spread of the Fuglevand,
	// Winter and Patla 1993 pool model, J Neurophysiol 70:2470; from
	// memory), from thresholdMinPct to the muscle's highest threshold
	// (Site.MaxThresholdPctMVC; 50-80 % MVC by muscle is common practice).
	thresholdMinPct     = 2.0
	defaultMaxThreshold = 60
	rateGainPPS         = 0.8 // rate rise per % excitation above threshold, pps
	// A unit stops when the steady-state force falls below
	// max(derecruitMinFrac x threshold, derecruitFrac x threshold -
	// derecruitOffPct) (% MVC): derecruitment below recruitment, as on
	// slow ramps (common practice), firing at most derecruitSlowPPS below
	// its initial rate on the way there.
	derecruitFrac    = 0.75
	derecruitOffPct  = 1.5
	derecruitMinFrac = 0.4
	derecruitSlowPPS = 1.5
	driveSD          = 0.01 // relative SD of the slow common-drive fluctuation
	driveCutHz       = 1.5  // its low-pass corner, Hz
	// foundBelowFrac: the "auto" decomposition finds the units whose
	// recruitment threshold is at most this fraction of the target (units
	// recruited just under the plateau discharge too few times at a stable
	// rate to be found).
	foundBelowFrac = 0.88
	// backgroundShare is the share of the maximal force made by the units
	// a decomposition never sees (a surface grid finds a sample of a
	// muscle's hundreds of units): a smooth force growing in proportion to
	// the excitation, so the simulated units' steps do not dominate the
	// force (a property of our model).
	backgroundShare = 0.75
	// calibrationRounds is how often thresholds are mapped through the
	// steady-state force table, which depends on them (a fixed point).
	calibrationRounds = 12
	minDischarges     = 10
	forceNoiseRel     = 0.0005 // force sensor noise SD, fraction of MVC
	badChannelNoise   = 5
	excitationSteps   = 10000 // steady-state force table resolution (0.01 %)
	// leadExtraS is added to the twitch delay in the excitation lead: about
	// half an interval, the delay of rate changes reaching the discharges.
	leadExtraS = 0.05
)

// rngFor returns a PCG generator for one purpose, seeded from the study
// seed and the parts naming the purpose.
func rngFor(seed uint64, parts ...uint64) *rand.Rand {
	h := mix64(seed ^ 0x6d756172635f7379)
	for _, p := range parts {
		h = mix64(h ^ (p+1)*golden)
	}
	return rand.New(rand.NewPCG(h, mix64(h^0x5bd1e995)))
}

// Purposes for rngFor.
const (
	purposePerson = iota + 1
	purposePool
	purposeTrial
	purposeNoise
	purposeDecomp
)

// Generate makes the study: one Generated per subject, in subject order.
func Generate(cfg Config) ([]*Generated, error) {
	if err := cfg.check(); err != nil {
		return nil, err
	}
	out := make([]*Generated, cfg.Subjects)
	for s := range cfg.Subjects {
		g, err := generateSubject(cfg, s)
		if err != nil {
			return nil, err
		}
		out[s] = g
	}
	return out, nil
}

func generateSubject(cfg Config, s int) (*Generated, error) {
	fs := cfg.SamplingRateHz
	prng := rngFor(cfg.Seed, purposePerson, uint64(s))
	p := invent(s, prng)
	mvc := roundTo(cfg.MVCRangeN[0]+(cfg.MVCRangeN[1]-cfg.MVCRangeN[0])*prng.Float64(), 1)
	sh := newTemplateShape(fs)

	plans := make([]arrayPlan, len(cfg.Arrays))
	seen := map[string]bool{}
	for a, spec := range cfg.Arrays {
		site := spec.Sites[s%len(spec.Sites)]
		if seen[site.ArrayName] {
			return nil, fmt.Errorf("synth: subject %d has two arrays named %q; give the arrays' sites distinct names", s+1, site.ArrayName)
		}
		seen[site.ArrayName] = true
		g, chans := makeGrid(spec)
		plans[a] = arrayPlan{spec: spec, site: site, grid: g, channels: chans,
			units: makePool(rngFor(cfg.Seed, purposePool, uint64(s), uint64(a)), cfg.UnitsPerMuscle, g, sh, site.MaxThresholdPctMVC)}
	}
	tab := calibrate(plans)
	lead := int(math.Round((twitchLagS(plans) + leadExtraS) * fs))
	newtonPerUnit := mvc / tab[len(tab)-1]

	rec := &record.Recording{
		Software: synthSoftware + " " + schema.SoftwareVersion,
		Study:    study(),
		Subject:  p.subject(),
		Session:  p.session(),
	}
	rec.Session.Extra = record.Extra{"generator": synthSoftware}
	truth := Truth{Seed: cfg.Seed, Subject: p.code, MVCN: mvc}

	nRest := int(math.Round(cfg.RestS * fs))
	nRamp := int(math.Round(cfg.RampS * fs))
	nPl := int(math.Round(cfg.PlateauS * fs))
	n := 2*nRest + 2*nRamp + nPl
	pl0, pl1 := int64(nRest+nRamp), int64(nRest+nRamp+nPl)

	for li, level := range cfg.LevelsPctMVC {
		trng := rngFor(cfg.Seed, purposeTrial, uint64(s), uint64(li))
		name := "ramp_" + strconv.FormatFloat(level, 'f', -1, 64) + "pct"
		lvl := level / 100
		frac := make([]float64, n)
		for k := range frac {
			switch {
			case k < nRest:
			case k < nRest+nRamp:
				frac[k] = lvl * float64(k-nRest) / float64(nRamp)
			case k < nRest+nRamp+nPl:
				frac[k] = lvl
			case k < nRest+2*nRamp+nPl:
				frac[k] = lvl * (1 - float64(k-(nRest+nRamp+nPl))/float64(nRamp))
			}
		}
		// Excitation: the steady-state inverse of the target lead samples
		// ahead (the subject anticipates the twitch delay), with a slow
		// common-drive fluctuation.
		ePl := excitationFor(tab, lvl)
		exc := make([]float64, n)
		a := math.Exp(-2 * math.Pi * driveCutHz / fs)
		b := math.Sqrt(1 - a*a)
		y := trng.NormFloat64()
		for k := range exc {
			y = a*y + b*trng.NormFloat64()
			exc[k] = excitationFor(tab, frac[min(n-1, k+lead)]) * (1 + driveSD*y)
		}
		// Discharges of every unit.
		disc := make([][][]int64, len(plans))
		for ai := range plans {
			disc[ai] = make([][]int64, len(plans[ai].units))
			for ui := range plans[ai].units {
				disc[ai][ui] = discharge(&plans[ai].units[ui], exc, fs, trng)
			}
		}
		// Force: sum of critically damped twitches, then scaled per trial
		// so the plateau mean equals the target.
		raw := make([]float64, n)
		// The background units follow the excitation one twitch delay late.
		var full float64
		for ai := range plans {
			for ui := range plans[ai].units {
				u := &plans[ai].units[ui]
				full += u.peakRel * u.tcS * math.E * u.rpk
			}
		}
		bg := backgroundPerPct(full) * newtonPerUnit
		delay := int(math.Round(twitchLagS(plans) * fs))
		for k := range raw {
			raw[k] = bg * exc[max(0, k-delay)]
		}
		for ai := range plans {
			for ui := range plans[ai].units {
				u := &plans[ai].units[ui]
				addTwitches(raw, disc[ai][ui], u.peakRel*newtonPerUnit, u.tcS, fs)
			}
		}
		var sumRaw float64
		for k := pl0; k < pl1; k++ {
			sumRaw += raw[k]
		}
		scale := lvl * mvc * float64(nPl) / sumRaw
		if !(scale > 0) || math.IsInf(scale, 0) {
			return nil, fmt.Errorf("synth: subject %d level %g: no force on the plateau; raise UnitsPerMuscle or the level", s+1, level)
		}
		force := make([]float64, n)
		target := make([]float64, n)
		for k := range force {
			force[k] = roundTo(scale*raw[k]+forceNoiseRel*mvc*trng.NormFloat64(), 4)
			target[k] = roundTo(frac[k]*mvc, 4)
		}
		trial := record.Trial{
			Name: name, Task: trialTask, TargetPctMVC: level, MVC: mvc, MVCUnit: "N",
			Profile: record.ForceProfile{Shape: "trapezoid", RestS: cfg.RestS, RampUpS: cfg.RampS,
				PlateauS: cfg.PlateauS, RampDownS: cfg.RampS},
			Force:       record.Signal{SamplingRateHz: fs, Unit: "N", Values: force},
			ForceTarget: record.Signal{SamplingRateHz: fs, Unit: "N", Values: target},
			Notes:       fmt.Sprintf("trial %d of %d; 2 min rest before", li+1, len(cfg.LevelsPctMVC)),
		}
		tt := TrialTruth{Trial: name, TargetPctMVC: level, PlateauStart: pl0, PlateauEnd: pl1,
			PlateauExcitationPct: ePl, ExcitationLeadS: float64(lead) / fs, ForceScale: scale}
		for ai := range plans {
			arr, at := buildArray(cfg, s, li, ai, &plans[ai], disc[ai], force, mvc, ePl, scale*newtonPerUnit, pl0, pl1, tab, p.side)
			trial.Arrays = append(trial.Arrays, arr)
			tt.Arrays = append(tt.Arrays, at)
		}
		rec.Trials = append(rec.Trials, trial)
		truth.Trials = append(truth.Trials, tt)
	}
	return &Generated{Recording: rec, Truth: truth}, nil
}

// discharge simulates one unit's discharge train: it starts when the
// excitation reaches the threshold, fires at rate(excitation) with Gaussian
// ISI jitter, stops when the excitation falls below derecruitAt, and may
// start again.
func discharge(u *poolUnit, exc []float64, fs float64, rng *rand.Rand) []int64 {
	var d []int64
	n := len(exc)
	k := 0
	for k < n {
		for k < n && exc[k] < u.rte {
			k++
		}
		if k >= n {
			break
		}
		t := float64(k)/fs + 0.03*rng.Float64()
		for {
			i := int64(math.Round(t * fs))
			if i >= int64(n) {
				return d
			}
			e := exc[i]
			if e < u.derecruitAt() {
				k = int(i)
				break
			}
			if len(d) == 0 || i > d[len(d)-1] {
				d = append(d, i)
			}
			r := u.firingRate(e)
			t += (1 + u.cov*clampN(rng, 2.5)) / r
		}
	}
	return d
}

// addTwitches adds peak x (t/tc) exp(1 - t/tc) for each discharge (up to
// 6 tc after it) to f.
func addTwitches(f []float64, d []int64, peak, tc, fs float64) {
	m := int(math.Ceil(6 * tc * fs))
	tw := make([]float64, m)
	for i := range tw {
		x := float64(i) / fs / tc
		tw[i] = peak * x * math.Exp(1-x)
	}
	for _, k := range d {
		end := min(len(f), int(k)+m)
		for j := int(k); j < end; j++ {
			f[j] += tw[j-int(k)]
		}
	}
}

func buildArray(cfg Config, s, li, ai int, plan *arrayPlan, disc [][]int64, force []float64, mvc, ePl, newton float64, pl0, pl1 int64, tab []float64, side string) (record.Array, ArrayTruth) {
	fs := cfg.SamplingRateHz
	ch := len(plan.channels)
	sh := newTemplateShape(fs)
	n := len(force)
	src := &emgSource{rows: n, channels: ch, firstLag: sh.firstLag, lags: sh.lags, quant: 100,
		key: mix64(rngFor(cfg.Seed, purposeNoise, uint64(s), uint64(li), uint64(ai)).Uint64())}
	var power float64
	for ui, d := range disc {
		if len(d) == 0 {
			continue
		}
		src.tmpl = append(src.tmpl, plan.units[ui].tmpl)
		src.disc = append(src.disc, d)
		i0 := sort.Search(len(d), func(i int) bool { return d[i] >= pl0 })
		i1 := sort.Search(len(d), func(i int) bool { return d[i] >= pl1 })
		power += float64(i1-i0) * plan.units[ui].energy
	}
	power /= float64(pl1-pl0) * float64(ch)
	sd := math.Sqrt(power / math.Pow(10, cfg.SNRdB/10))
	src.noiseSD = make([]float64, ch)
	for c := range src.noiseSD {
		src.noiseSD[c] = sd
		if !plan.channels[c].Usable {
			src.noiseSD[c] = sd * badChannelNoise
		}
	}
	arr := record.Array{
		Name: plan.site.ArrayName, Muscle: plan.site.Muscle, Side: side,
		Rows: plan.spec.Rows, Columns: plan.spec.Columns, IEDMm: plan.spec.IEDMm,
		Gain: 150, ADCBits: 16, FilterLowHz: 10, FilterHighHz: 500,
		Montage: "monopolar", Reference: "electrode band at the ankle",
		SoftwareFilters: "{}", PlacementScheme: "measured",
		PlacementDescription: "grid centred over the muscle belly, columns along the fibres, from palpation during a brief contraction",
		SamplingRateHz:       fs, Unit: "uV", SampleType: record.Float32,
		Channels: slices.Clone(plan.channels), Samples: src,
	}
	at := ArrayTruth{Array: arr.Name, Muscle: arr.Muscle, NoiseSDuV: sd, SignalRMSuV: math.Sqrt(power)}

	// The units the "auto" decomposition finds, in order of recruitment.
	var found []int
	for ui, d := range disc {
		if len(d) >= minDischarges && plan.units[ui].rtPct <= foundBelowFrac*100*forceAt(tab, ePl) {
			found = append(found, ui)
		}
	}
	sort.SliceStable(found, func(i, j int) bool { return disc[found[i]][0] < disc[found[j]][0] })
	autoID := map[int]int64{}
	for k, ui := range found {
		autoID[ui] = int64(k + 1)
	}
	drng := rngFor(cfg.Seed, purposeDecomp, uint64(s), uint64(li), uint64(ai))
	auto := record.Decomposition{
		Name: "auto", Method: "simulated decomposition: true discharges with detection errors", MethodVersion: "1",
		Parameters: mustJSON(map[string]any{"seed": cfg.Seed, "detection_errors": cfg.DetectionErrors,
			"found_below_fraction_of_target": foundBelowFrac, "min_discharges": minDischarges}),
		Notes: "generated by " + synthSoftware + "; ground truth in truth.json",
	}
	missed := map[int][]int64{}
	spur := map[int][]int64{}
	sil := map[int]float64{}
	pnr := map[int]float64{}
	for _, ui := range found {
		u := &plan.units[ui]
		d := disc[ui]
		got := d
		if cfg.DetectionErrors {
			got, missed[ui], spur[ui] = detectionErrors(d, u.quality, fs, drng)
		}
		pnr[ui] = roundTo(max(25, min(40, 28+12*u.quality+0.7*clampN(drng, 2))), 2)
		sil[ui] = roundTo(max(0.85, min(0.98, 0.88+0.10*u.quality+0.01*clampN(drng, 2))), 4)
		unit := figures(autoID[ui], got, d, force, fs, mvc, pl0, pl1)
		unit.Silhouette, unit.PNRdB = sil[ui], pnr[ui]
		auto.Units = append(auto.Units, unit)
	}
	auto.ExtraColumns = []record.Column{twitchColumn(plan, found)}
	if cfg.MUAPs {
		m := &record.MUAPs{Units: len(found), Channels: ch, Lags: sh.lags, FirstLag: sh.firstLag, Unit: "uV",
			Data: make([]float32, len(found)*ch*sh.lags)}
		for k, ui := range found {
			t := plan.units[ui].tmpl
			for c := range ch {
				for l := range sh.lags {
					m.Data[(k*ch+c)*sh.lags+l] = t[l*ch+c]
				}
			}
		}
		auto.MUAPs = m
	}
	arr.Decompositions = append(arr.Decompositions, auto)

	if cfg.EditedDecomposition && ai == 0 {
		kept := slices.Clone(found)
		dropped := ""
		if len(kept) >= 3 {
			worst := 0
			for k, ui := range kept {
				if sil[ui] < sil[kept[worst]] {
					worst = k
				}
			}
			dropped = fmt.Sprintf("; unit %d dropped (lowest SIL)", autoID[kept[worst]])
			kept = slices.Delete(kept, worst, worst+1)
		}
		ed := record.Decomposition{
			Name: "edited", Method: "manual inspection of auto", MethodVersion: "1",
			Parameters: mustJSON(map[string]any{"from": "auto"}), EditedByHand: true,
			Notes: "spurious discharges removed, missed discharges restored" + dropped,
		}
		for _, ui := range kept {
			unit := figures(autoID[ui], disc[ui], disc[ui], force, fs, mvc, pl0, pl1)
			unit.Silhouette = roundTo(min(0.99, sil[ui]+0.005), 4)
			unit.PNRdB = roundTo(min(40, pnr[ui]+0.5), 2)
			ed.Units = append(ed.Units, unit)
		}
		ed.ExtraColumns = []record.Column{twitchColumn(plan, kept)}
		arr.Decompositions = append(arr.Decompositions, ed)
	}

	for ui, d := range disc {
		if len(d) == 0 {
			continue
		}
		u := &plan.units[ui]
		at.Units = append(at.Units, UnitTruth{
			Pool: ui, AutoID: autoID[ui], ExcitationThresholdPct: u.rte,
			RecruitPctMVC:     100 * forceAt(tab, u.rte),
			DerecruitPctMVC:   100 * forceAt(tab, u.derecruitAt()),
			InitialRatePPS:    u.r0,
			PlateauRatePPS:    u.rate(ePl),
			PeakRatePPS:       u.rpk,
			RateGainPPSPerPct: u.gain,
			ISICoV:            u.cov,
			TwitchTimeMs:      u.tcS * 1000,
			TwitchPeakN:       u.peakRel * newton,
			MUAPPeakToPeakUV:  u.p2p,
			InnervationXMm:    u.muap.x0, InnervationYMm: u.muap.y0, ConductionMPerS: u.muap.velocity,
			Discharges: d, Missed: missed[ui], Spurious: spur[ui],
		})
	}
	return arr, at
}

// figures computes a unit's table row from its decomposed discharges got
// (accuracy against the true ones).
func figures(id int64, got, truth []int64, force []float64, fs, mvc float64, pl0, pl1 int64) record.Unit {
	u := record.NewUnit(id)
	u.Label = strconv.FormatInt(id, 10)
	u.Discharges = got
	u.AccuracyPct = roundTo(rateOfAgreement(got, truth), 2)
	u.RecruitPctMVC = roundTo(recruitPct(force, got[0], mvc), 3)
	u.DerecruitPctMVC = roundTo(recruitPct(force, got[len(got)-1], mvc), 3)
	u.InitialRatePPS = roundTo(initialRate(got, fs), 3)
	r, c := plateauISI(got, fs, pl0, pl1)
	u.MeanRatePPS, u.ISICoV = roundTo(r, 3), roundTo(c, 4)
	return u
}

func twitchColumn(plan *arrayPlan, units []int) record.Column {
	col := record.Column{Name: "twitch_time", Unit: "ms", Values: make([]float64, len(units))}
	for k, ui := range units {
		col.Values[k] = roundTo(plan.units[ui].tcS*1000, 1)
	}
	return col
}

// detectionErrors drops a few true discharges (probability 0.1-0.7 %,
// higher for small units) and adds a few spurious ones inside long enough
// intervals, returning the decomposed train, the missed and the spurious.
func detectionErrors(d []int64, quality, fs float64, rng *rand.Rand) (got, missed, spurious []int64) {
	pMiss := 0.001 + 0.006*(1-quality)
	pSpur := 0.0005 + 0.002*(1-quality)
	gap := int64(math.Ceil(0.015 * fs))
	for i, k := range d {
		// Keep the first four discharges: a decomposition seldom misses a
		// unit's first discharges without missing the unit.
		if i >= 4 && rng.Float64() < pMiss {
			missed = append(missed, k)
		} else {
			got = append(got, k)
		}
		if i >= 3 && i+1 < len(d) && d[i+1]-k > 3*gap && rng.Float64() < pSpur {
			x := k + gap + rng.Int64N(d[i+1]-k-2*gap)
			got = append(got, x)
			spurious = append(spurious, x)
		}
	}
	return got, missed, spurious
}

func mustJSON(v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		panic(err) // only maps of plain values are passed
	}
	return string(b)
}

// twitchLagS is the force-weighted mean delay of the twitches (the mean of
// (t/tc) exp(1 - t/tc) is 2 tc), s.
func twitchLagS(plans []arrayPlan) float64 {
	var num, den float64
	for _, p := range plans {
		for _, u := range p.units {
			w := u.peakRel * u.tcS
			num += w * 2 * u.tcS
			den += w
		}
	}
	return num / den
}
