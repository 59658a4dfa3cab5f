package synth

import (
	"errors"
	"fmt"
	"math"
)

// Config describes a synthetic study. Every random choice is drawn from PCG
// generators seeded from Seed, so a Config always gives the same study.
type Config struct {
	// Seed makes the study; another seed gives another study.
	Seed uint64
	// Subjects is the number of invented subjects (one session each).
	Subjects int
	// LevelsPctMVC are the plateau target levels in % MVC, one trial each,
	// in this order. Each must be in (0, 90].
	LevelsPctMVC []float64
	// SamplingRateHz is the sampling rate of EMG, force and target, Hz.
	SamplingRateHz float64
	// PlateauS, RampS and RestS are the trapezoid's durations in seconds:
	// rest, ramp up (RampS), plateau, ramp down (RampS), rest. The ramps
	// take RampS at every level.
	PlateauS, RampS, RestS float64
	// UnitsPerMuscle is the size of each muscle's simulated motor-unit pool.
	UnitsPerMuscle int
	// SNRdB is the EMG signal-to-noise ratio on each trial's plateau, dB:
	// 10 log10(mean MUAP-train power / noise power), averaged over the
	// array's channels (before the extra noise of a bad channel).
	SNRdB float64
	// MVCRangeN is the range the subjects' MVC values are drawn from, N.
	MVCRangeN [2]float64
	// Arrays are the electrode arrays recorded at once in every trial, each
	// on its own muscle.
	Arrays []ArraySpec
	// DetectionErrors adds a few missed and spurious discharges to the
	// "auto" decompositions (the truth keeps the real ones).
	DetectionErrors bool
	// EditedDecomposition adds an "edited" decomposition to the first
	// array of every trial: spurious discharges removed, missed ones
	// restored, the least reliable unit dropped.
	EditedDecomposition bool
	// MUAPs attaches the true MUAP templates to the "auto" decompositions.
	// The text exports do not carry them.
	MUAPs bool
}

// ArraySpec is one electrode array (grid) type and where it is placed.
type ArraySpec struct {
	// Rows and Columns give the grid; Rows run along the muscle fibres.
	Rows, Columns int
	// SkipCorner leaves out the electrode at row 0, column 0 (a 13 x 5 grid
	// with one corner empty has 64 electrodes).
	SkipCorner bool
	// IEDMm is the inter-electrode distance, mm.
	IEDMm float64
	// Sites lists where the array goes: subject k (0-based) uses
	// Sites[k % len(Sites)], so a study can cover more muscles than arrays.
	Sites []Site
	// BadChannel is the 0-based index of a channel with five times the
	// noise, marked not usable; -1 for none.
	BadChannel int
}

// Site is an array's placement: its name in the recording and the muscle.
type Site struct {
	ArrayName string // e.g. "ta_grid"
	Muscle    string // e.g. "tibialis anterior"
	// MaxThresholdPctMVC is the highest recruitment threshold of the
	// muscle's pool, % MVC (50-80 by muscle is common practice); 0 means 60.
	MaxThresholdPctMVC float64
}

// DemoConfig is the built-in demo study: an invented ankle dorsiflexion
// fatigue study with three subjects, trials at 10, 30 and 50 % MVC, an 8 x 8
// grid on tibialis anterior and a 13 x 5 grid (one corner empty) on extensor
// digitorum longus or extensor hallucis longus, both 64 electrodes 8 mm
// apart, 2048 Hz, 16 s trials with 5 s ramps (slow ramps, 2-10 % MVC/s).
func DemoConfig() Config {
	return Config{
		Seed:           73091,
		Subjects:       3,
		LevelsPctMVC:   []float64{10, 30, 50},
		SamplingRateHz: 2048,
		RestS:          0.5, RampS: 5, PlateauS: 5,
		UnitsPerMuscle: 20,
		SNRdB:          20,
		MVCRangeN:      [2]float64{200, 400},
		Arrays: []ArraySpec{
			{Rows: 8, Columns: 8, IEDMm: 8, BadChannel: -1,
				Sites: []Site{{"ta_grid", "tibialis anterior", 75}}},
			{Rows: 13, Columns: 5, SkipCorner: true, IEDMm: 8, BadChannel: 37,
				Sites: []Site{{"edl_grid", "extensor digitorum longus", 60}, {"ehl_grid", "extensor hallucis longus", 55}}},
		},
		DetectionErrors:     true,
		EditedDecomposition: true,
		MUAPs:               true,
	}
}

// TestConfig is a tiny study for unit tests: one subject, two levels, 3 s
// plateaus at 1024 Hz, two 4 x 4 grids (16 channels).
func TestConfig() Config {
	return Config{
		Seed:           7,
		Subjects:       1,
		LevelsPctMVC:   []float64{20, 40},
		SamplingRateHz: 1024,
		RestS:          0.5, RampS: 2, PlateauS: 3,
		UnitsPerMuscle: 14,
		SNRdB:          20,
		MVCRangeN:      [2]float64{200, 400},
		Arrays: []ArraySpec{
			{Rows: 4, Columns: 4, IEDMm: 8, BadChannel: -1,
				Sites: []Site{{"ta_grid", "tibialis anterior", 75}}},
			{Rows: 4, Columns: 4, IEDMm: 8, BadChannel: 5,
				Sites: []Site{{"edl_grid", "extensor digitorum longus", 60}}},
		},
		DetectionErrors:     true,
		EditedDecomposition: true,
		MUAPs:               true,
	}
}

func (c Config) check() error {
	var errs []error
	bad := func(format string, a ...any) { errs = append(errs, fmt.Errorf("synth: "+format, a...)) }
	if c.Subjects < 1 {
		bad("Subjects is %d; give at least 1", c.Subjects)
	}
	if len(c.LevelsPctMVC) == 0 {
		bad("no LevelsPctMVC; give at least one level")
	}
	seen := map[float64]bool{}
	for _, l := range c.LevelsPctMVC {
		if !(l > 0 && l <= 90) {
			bad("level %g %% MVC outside (0, 90]", l)
		}
		if seen[l] {
			bad("level %g %% MVC given twice (one trial per level)", l)
		}
		seen[l] = true
	}
	if !(c.SamplingRateHz >= 500 && c.SamplingRateHz <= 100000) {
		bad("SamplingRateHz %g outside 500..100000", c.SamplingRateHz)
	}
	if !(c.PlateauS >= 1) || !(c.RampS >= 0.5) || !(c.RestS >= 0) || math.IsInf(c.PlateauS+c.RampS+c.RestS, 0) {
		bad("durations plateau %g s, ramp %g s, rest %g s: need plateau >= 1, ramp >= 0.5, rest >= 0", c.PlateauS, c.RampS, c.RestS)
	}
	if c.UnitsPerMuscle < 2 || c.UnitsPerMuscle > 500 {
		bad("UnitsPerMuscle %d outside 2..500", c.UnitsPerMuscle)
	}
	if math.IsNaN(c.SNRdB) || math.IsInf(c.SNRdB, 0) {
		bad("SNRdB is not a number")
	}
	if !(c.MVCRangeN[0] > 0 && c.MVCRangeN[1] >= c.MVCRangeN[0]) {
		bad("MVCRangeN %v: need 0 < low <= high", c.MVCRangeN)
	}
	if len(c.Arrays) == 0 {
		bad("no Arrays")
	}
	for i, a := range c.Arrays {
		n := a.Rows * a.Columns
		if a.SkipCorner {
			n--
		}
		if a.Rows < 1 || a.Columns < 1 || n < 1 {
			bad("array %d: grid %d x %d has no electrodes", i, a.Rows, a.Columns)
		}
		if !(a.IEDMm > 0) {
			bad("array %d: IEDMm %g must be > 0", i, a.IEDMm)
		}
		if len(a.Sites) == 0 {
			bad("array %d: no Sites", i)
		}
		for _, s := range a.Sites {
			if s.ArrayName == "" || s.Muscle == "" {
				bad("array %d: site %+v needs an array name and a muscle", i, s)
			}
			if s.MaxThresholdPctMVC != 0 && !(s.MaxThresholdPctMVC >= 5 && s.MaxThresholdPctMVC <= 100) {
				bad("array %d: site %q: MaxThresholdPctMVC %g outside 5..100", i, s.ArrayName, s.MaxThresholdPctMVC)
			}
		}
		if a.BadChannel >= n {
			bad("array %d: BadChannel %d outside 0..%d", i, a.BadChannel, n-1)
		}
	}
	return errors.Join(errs...)
}
