package analysis

import (
	"fmt"
	"math"
	"sort"

	"muarc/record"
)

// InitialISIs is the number of inter-discharge intervals from recruitment
// that give the initial rate: the initial rate is InitialISIs divided by the
// time from the first to the (InitialISIs+1)-th discharge, i.e. 1 / the mean
// of the first InitialISIs intervals. A unit with fewer discharges has no
// initial rate (NaN).
const InitialISIs = 3

// PlateauMinISIs is the least number of intervals on the plateau for a
// plateau mean rate and ISI CoV; with fewer they are NaN.
const PlateauMinISIs = 3

// Method describes, in words, how the figures of this package are computed;
// it goes into a file's provenance when the figures are stored.
func Method() map[string]any {
	return map[string]any{
		"recruit":         "force (linearly interpolated) at the first discharge; derecruit: at the last discharge",
		"initial_rate":    fmt.Sprintf("1 / mean of the first %d inter-discharge intervals", InitialISIs),
		"plateau":         fmt.Sprintf("longest run of the force target within %g %% of its peak (no target: of the force smoothed by a %g s moving mean, within %g %% of its peak)", 100*PlateauTargetTol, PlateauForceSmoothS, 100*PlateauForceTol),
		"plateau_rate":    fmt.Sprintf("1 / mean of the intervals whose both discharges lie on the plateau (at least %d intervals)", PlateauMinISIs),
		"plateau_isi_cov": "sample standard deviation / mean of the plateau intervals",
		"regression":      "ordinary least squares of plateau mean rate and of initial rate on recruitment threshold (% MVC), per decomposition",
		"muap_window_ms":  1000 * MUAPHalfWindowS,
	}
}

// UnitStats are the derived figures of one motor unit. NaN is unknown.
type UnitStats struct {
	ID int64 `json:"id"`
	// Label is the unit's label as the lab wrote it ("" when none).
	Label      string `json:"label"`
	Discharges int    `json:"discharge_count"`
	// FirstS and LastS are the times of the first and last discharge, s
	// from the trial start.
	FirstS float64 `json:"first_discharge_s"`
	LastS  float64 `json:"last_discharge_s"`
	// RecruitPctMVC and DerecruitPctMVC are the force at the first and last
	// discharge in % MVC.
	RecruitPctMVC   float64 `json:"recruit_pct_mvc"`
	DerecruitPctMVC float64 `json:"derecruit_pct_mvc"`
	// RecruitForce and DerecruitForce are the same in force units
	// (DecompositionStats.ForceUnit).
	RecruitForce   float64 `json:"recruit_force"`
	DerecruitForce float64 `json:"derecruit_force"`
	// InitialRatePPS is the initial rate at recruitment (see InitialISIs).
	InitialRatePPS float64 `json:"initial_rate_pps"`
	// PlateauISIs is the number of intervals wholly on the plateau;
	// PlateauRatePPS is 1 / their mean (pps) and PlateauISICoV their sample
	// standard deviation / mean (dimensionless); both NaN with fewer than
	// PlateauMinISIs intervals.
	PlateauISIs    int     `json:"plateau_isi_count"`
	PlateauRatePPS float64 `json:"plateau_rate_pps"`
	PlateauISICoV  float64 `json:"plateau_isi_cov"`
}

// DecompositionStats are the figures of one decomposition of one array of
// one trial.
type DecompositionStats struct {
	Trial         string `json:"trial"`
	Array         string `json:"array"`
	Decomposition string `json:"decomposition"`
	// Plateau is the plateau used; nil when none was found.
	Plateau *Plateau `json:"plateau,omitempty"`
	// ForceUnit is the unit of RecruitForce and DerecruitForce.
	ForceUnit string      `json:"force_unit,omitempty"`
	Units     []UnitStats `json:"units"`
	// PlateauRateFit regresses plateau mean rate (pps) and InitialRateFit
	// initial rate (pps) on recruitment threshold (% MVC).
	PlateauRateFit Fit `json:"plateau_rate_fit"`
	InitialRateFit Fit `json:"initial_rate_fit"`
	// Notes say what could not be computed and why.
	Notes []string `json:"notes,omitempty"`
}

// Recording computes the figures of every decomposition in rec, in file
// order.
func Recording(rec *record.Recording) []DecompositionStats {
	var out []DecompositionStats
	for ti := range rec.Trials {
		tr := &rec.Trials[ti]
		for ai := range tr.Arrays {
			arr := &tr.Arrays[ai]
			for di := range arr.Decompositions {
				out = append(out, Decomposition(tr, arr, &arr.Decompositions[di]))
			}
		}
	}
	return out
}

// Decomposition computes the figures of decomposition dec of array arr of
// trial tr.
func Decomposition(tr *record.Trial, arr *record.Array, dec *record.Decomposition) DecompositionStats {
	ds := DecompositionStats{Trial: tr.Name, Array: arr.Name, Decomposition: dec.Name}
	pl, havePl := FindPlateau(tr)
	if havePl {
		ds.Plateau = &pl
	} else {
		ds.Notes = append(ds.Notes, "no force target or force trace to find the plateau on: plateau rates and ISI CoV are unknown")
	}
	var sc ForceScale
	if tr.Force.Present() {
		sc = ScaleOf(tr, tr.Force)
		ds.ForceUnit = sc.Unit
		if sc.Note != "" {
			ds.Notes = append(ds.Notes, sc.Note)
		}
	} else {
		ds.Notes = append(ds.Notes, "the trial has no force trace: thresholds are unknown")
	}
	if !(arr.SamplingRateHz > 0) {
		ds.Notes = append(ds.Notes, fmt.Sprintf("array %q has no sampling rate: discharge times are unknown", arr.Name))
	}
	outside := 0
	for _, u := range dec.Units {
		us, out := unitStats(tr, arr, u, sc, pl, havePl)
		if out {
			outside++
		}
		if !sort.SliceIsSorted(u.Discharges, func(i, j int) bool { return u.Discharges[i] < u.Discharges[j] }) {
			ds.Notes = append(ds.Notes, fmt.Sprintf("unit %d: discharges are not in ascending order; they were sorted for these figures", u.ID))
		}
		ds.Units = append(ds.Units, us)
	}
	if outside > 0 {
		ds.Notes = append(ds.Notes, fmt.Sprintf("%d unit(s) discharge first or last outside the force trace: those thresholds are unknown", outside))
	}
	x := make([]float64, len(ds.Units))
	yp := make([]float64, len(ds.Units))
	yi := make([]float64, len(ds.Units))
	for i, u := range ds.Units {
		x[i], yp[i], yi[i] = u.RecruitPctMVC, u.PlateauRatePPS, u.InitialRatePPS
	}
	ds.PlateauRateFit = LinearFit(x, yp)
	ds.InitialRateFit = LinearFit(x, yi)
	return ds
}

// unitStats computes one unit's figures; outside is true when a threshold
// could not be taken because a discharge lies outside the force trace.
func unitStats(tr *record.Trial, arr *record.Array, u record.Unit, sc ForceScale, pl Plateau, havePl bool) (UnitStats, bool) {
	nan := math.NaN()
	us := UnitStats{ID: u.ID, Label: u.Label, Discharges: len(u.Discharges), FirstS: nan, LastS: nan,
		RecruitPctMVC: nan, DerecruitPctMVC: nan, RecruitForce: nan, DerecruitForce: nan,
		InitialRatePPS: nan, PlateauRatePPS: nan, PlateauISICoV: nan}
	if len(u.Discharges) == 0 || !(arr.SamplingRateHz > 0) {
		return us, false
	}
	d := u.Discharges
	if !sort.SliceIsSorted(d, func(i, j int) bool { return d[i] < d[j] }) {
		d = append([]int64(nil), d...)
		sort.Slice(d, func(i, j int) bool { return d[i] < d[j] })
	}
	t := DischargeTimesS(d, arr.SamplingRateHz, arr.StartS)
	us.FirstS, us.LastS = t[0], t[len(t)-1]
	outside := false
	if tr.Force.Present() {
		f0, f1 := SignalAt(tr.Force, us.FirstS), SignalAt(tr.Force, us.LastS)
		outside = math.IsNaN(f0) || math.IsNaN(f1)
		us.RecruitPctMVC, us.DerecruitPctMVC = f0*sc.ToPct, f1*sc.ToPct
		us.RecruitForce, us.DerecruitForce = f0*sc.ToForce, f1*sc.ToForce
	}
	if len(t) > InitialISIs && t[InitialISIs] > t[0] {
		us.InitialRatePPS = InitialISIs / (t[InitialISIs] - t[0])
	}
	if havePl {
		var isi []float64
		for k := 0; k+1 < len(t); k++ {
			if t[k] >= pl.StartS && t[k+1] <= pl.EndS && t[k+1] > t[k] {
				isi = append(isi, t[k+1]-t[k])
			}
		}
		us.PlateauISIs = len(isi)
		if len(isi) >= PlateauMinISIs {
			m, s := meanStd(isi)
			us.PlateauRatePPS, us.PlateauISICoV = 1/m, s/m
		}
	}
	return us, outside
}

func find(rec *record.Recording, trial, array, decomp string) *record.Decomposition {
	for ti := range rec.Trials {
		tr := &rec.Trials[ti]
		if tr.Name != trial {
			continue
		}
		for ai := range tr.Arrays {
			arr := &tr.Arrays[ai]
			if arr.Name != array {
				continue
			}
			for di := range arr.Decompositions {
				if arr.Decompositions[di].Name == decomp {
					return &arr.Decompositions[di]
				}
			}
		}
	}
	return nil
}
