package synth

import (
	"math"
	"testing"

	"muarc/record"
)

// smallDemo is the demo study with 2 x 2 grids: the same pools, trials and
// ramps, a fraction of the samples.
func smallDemo() Config {
	cfg := DemoConfig()
	for i := range cfg.Arrays {
		cfg.Arrays[i].Rows, cfg.Arrays[i].Columns, cfg.Arrays[i].SkipCorner, cfg.Arrays[i].BadChannel = 2, 2, false, -1
	}
	return cfg
}

// TestDemoPoolLooksLikeTheField asserts, as properties of our model, the
// figures labels report for ramp contractions (common practice; ranges from
// memory): recruitment thresholds spread from near 0 to about the target
// level, several units at every level, 6-10 pps at recruitment and 10-35
// pps on the plateau, derecruitment at or below recruitment on a slow ramp,
// and plateau rate falling with recruitment threshold.
func TestDemoPoolLooksLikeTheField(t *testing.T) {
	cfg := smallDemo()
	fs := cfg.SamplingRateHz
	checked := 0
	for _, g := range generate(t, cfg) {
		eachArray(t, g, func(tt TrialTruth, at ArrayTruth, trial record.Trial) {
			where := g.Truth.Subject + "/" + tt.Trial + "/" + at.Array
			lvl := tt.TargetPctMVC
			var thr, rate []float64
			below, n := 0, 0
			for _, u := range at.Units {
				if u.AutoID == 0 {
					continue
				}
				d := u.Discharges
				f0 := 100 * trial.Force.Values[d[0]] / trial.MVC
				f1 := 100 * trial.Force.Values[d[len(d)-1]] / trial.MVC
				if f0 < 0 {
					t.Errorf("%s unit %d: negative recruitment threshold %.3f %% MVC", where, u.Pool, f0)
				}
				if u.InitialRatePPS < 6 || u.InitialRatePPS > 10 {
					t.Errorf("%s unit %d: rate at recruitment %.2f pps outside 6-10", where, u.Pool, u.InitialRatePPS)
				}
				if !(u.DerecruitPctMVC < u.RecruitPctMVC) {
					t.Errorf("%s unit %d: model derecruits at %.2f, recruits at %.2f %% MVC", where, u.Pool, u.DerecruitPctMVC, u.RecruitPctMVC)
				}
				r, _, k := plateauRate(d, fs, tt.PlateauStart, tt.PlateauEnd)
				// Units recruited just under the target fire near their
				// recruitment rate: 8 pps is the floor, the mean is >= 10.
				if k < 3 || r < 8 || r > 36 {
					t.Errorf("%s unit %d: plateau rate %.2f pps over %d intervals, want 8-36", where, u.Pool, r, k)
				}
				thr, rate = append(thr, f0), append(rate, r)
				if f1 <= f0+0.25 {
					below++
				}
				n++
			}
			lo, hi := math.Inf(1), math.Inf(-1)
			for _, v := range thr {
				lo, hi = min(lo, v), max(hi, v)
			}
			if n < 6 {
				t.Errorf("%s: %d units found, want several (6 or more)", where, n)
			}
			if lo > 3 || hi < 0.65*lvl || hi > lvl {
				t.Errorf("%s: thresholds %.2f-%.2f %% MVC, want from under 3 to 65-100 %% of the %g %% target", where, lo, hi, lvl)
			}
			if m, _ := meanSD(rate); m < 10 {
				t.Errorf("%s: mean plateau rate %.2f pps, want 10 or more", where, m)
			}
			// The 10 % trial ramps at 2 % MVC/s: a slow ramp.
			if lvl == 10 && float64(below) < 0.8*float64(n) {
				t.Errorf("%s: %d of %d units derecruit at or below their recruitment force", where, below, n)
			}
			if lvl >= 30 {
				if r := pearson(thr, rate); r > -0.85 {
					t.Errorf("%s: Pearson r(threshold, plateau rate) %.3f, want below -0.85", where, r)
				}
			}
			checked++
		})
	}
	if checked != 18 {
		t.Errorf("checked %d trial arrays, want 18", checked)
	}
}

// TestPoolThresholdsReachTheMusclesHighest checks that each pool's
// thresholds run from thresholdMinPct to the site's highest threshold
// (50-80 % MVC by muscle, common practice), denser at the low end.
func TestPoolThresholdsReachTheMusclesHighest(t *testing.T) {
	cfg := DemoConfig()
	for _, spec := range cfg.Arrays {
		for _, site := range spec.Sites {
			if site.MaxThresholdPctMVC < 50 || site.MaxThresholdPctMVC > 80 {
				t.Errorf("%s: highest threshold %g %% MVC", site.Muscle, site.MaxThresholdPctMVC)
			}
			g, _ := makeGrid(ArraySpec{Rows: 2, Columns: 2, IEDMm: 8})
			us := makePool(rngFor(1, purposePool), cfg.UnitsPerMuscle, g, newTemplateShape(cfg.SamplingRateHz), site.MaxThresholdPctMVC)
			first, last := us[0].rtPct, us[len(us)-1].rtPct
			if first < 0.8*thresholdMinPct || first > 1.5*thresholdMinPct || last < 0.9*site.MaxThresholdPctMVC || last > site.MaxThresholdPctMVC {
				t.Errorf("%s: thresholds %.2f..%.2f %% MVC", site.Muscle, first, last)
			}
			half := 0
			for _, u := range us {
				if u.rtPct < site.MaxThresholdPctMVC/4 {
					half++
				}
			}
			if half < len(us)/2 {
				t.Errorf("%s: %d of %d units below a quarter of the highest threshold, want half or more", site.Muscle, half, len(us))
			}
		}
	}
}
