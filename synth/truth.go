package synth

import (
	"math"
	"sort"
)

// Truth is the ground truth of one generated recording: what the model
// really did, kept apart from the (imperfect) decompositions. It has no NaN
// values and marshals to JSON as is.
type Truth struct {
	Seed    uint64 `json:"seed"`
	Subject string `json:"subject"`
	// MVCN is the subject's MVC, N.
	MVCN   float64      `json:"mvc_n"`
	Trials []TrialTruth `json:"trials"`
}

// TrialTruth is the truth of one trial.
type TrialTruth struct {
	Trial        string  `json:"trial"`
	TargetPctMVC float64 `json:"target_pct_mvc"`
	// PlateauStart and PlateauEnd bound the plateau in samples [start, end).
	PlateauStart int64 `json:"plateau_start"`
	PlateauEnd   int64 `json:"plateau_end"`
	// PlateauExcitationPct is the excitation (% of maximal) that holds the
	// target in the model's steady state.
	PlateauExcitationPct float64 `json:"plateau_excitation_pct"`
	// ExcitationLeadS is how far ahead of the target the excitation runs,
	// s (the mean twitch delay plus 50 ms).
	ExcitationLeadS float64 `json:"excitation_lead_s"`
	// ForceScale is the per-trial factor applied to the summed twitches so
	// that the mean plateau force equals the target (close to 1).
	ForceScale float64      `json:"force_scale"`
	Arrays     []ArrayTruth `json:"arrays"`
}

// ArrayTruth is the truth of one array in one trial.
type ArrayTruth struct {
	Array  string `json:"array"`
	Muscle string `json:"muscle"`
	// NoiseSDuV is the EMG noise standard deviation, uV (a bad channel has
	// five times as much).
	NoiseSDuV float64 `json:"noise_sd_uv"`
	// SignalRMSuV is the plateau MUAP-train RMS averaged over channels, uV.
	SignalRMSuV float64     `json:"signal_rms_uv"`
	Units       []UnitTruth `json:"units"`
}

// UnitTruth is one motor unit that discharged in a trial.
type UnitTruth struct {
	// Pool is the unit's index in its muscle's pool (stable across the
	// subject's trials; ascending recruitment threshold).
	Pool int `json:"pool"`
	// AutoID is the unit's id in the "auto" decomposition, 0 when the
	// decomposition did not find it.
	AutoID int64 `json:"auto_id"`
	// ExcitationThresholdPct is the recruitment threshold in excitation,
	// % of maximal excitation.
	ExcitationThresholdPct float64 `json:"excitation_threshold_pct"`
	// RecruitPctMVC and DerecruitPctMVC are the steady-state forces at the
	// excitations where the unit starts and stops discharging, % MVC.
	RecruitPctMVC   float64 `json:"recruit_pct_mvc"`
	DerecruitPctMVC float64 `json:"derecruit_pct_mvc"`
	// InitialRatePPS is the discharge rate at recruitment, PlateauRatePPS
	// the model's rate at the plateau excitation, PeakRatePPS the ceiling,
	// RateGainPPSPerPct the rate rise per % excitation; all pps.
	InitialRatePPS    float64 `json:"initial_rate_pps"`
	PlateauRatePPS    float64 `json:"plateau_rate_pps"`
	PeakRatePPS       float64 `json:"peak_rate_pps"`
	RateGainPPSPerPct float64 `json:"rate_gain_pps_per_pct"`
	// ISICoV is the coefficient of variation of the Gaussian ISI jitter.
	ISICoV float64 `json:"isi_cov"`
	// TwitchTimeMs is the twitch contraction time, ms; TwitchPeakN the
	// twitch peak force in this trial, N.
	TwitchTimeMs float64 `json:"twitch_time_ms"`
	TwitchPeakN  float64 `json:"twitch_peak_n"`
	// MUAPPeakToPeakUV is the largest per-channel peak-to-peak MUAP, uV.
	MUAPPeakToPeakUV float64 `json:"muap_peak_to_peak_uv"`
	// InnervationXMm, InnervationYMm locate the innervation point in the
	// array frame, mm; ConductionMPerS is the conduction velocity, m/s.
	InnervationXMm  float64 `json:"innervation_x_mm"`
	InnervationYMm  float64 `json:"innervation_y_mm"`
	ConductionMPerS float64 `json:"conduction_m_per_s"`
	// Discharges are the true discharge sample indices.
	Discharges []int64 `json:"discharges"`
	// Missed are true discharges absent from the "auto" decomposition;
	// Spurious are its discharges that are not true ones.
	Missed   []int64 `json:"missed,omitempty"`
	Spurious []int64 `json:"spurious,omitempty"`
}

// Figure rules shared by the decompositions' unit tables (see EXPORTS.md).

// recruitPct is the force at discharge sample k in % of mvc.
func recruitPct(force []float64, k int64, mvc float64) float64 {
	if k < 0 || k >= int64(len(force)) {
		return math.NaN()
	}
	return 100 * force[k] / mvc
}

// initialRate is the rate over the first three inter-discharge intervals:
// 3 / (t[3] - t[0]), pps (NaN with fewer than 4 discharges).
func initialRate(d []int64, fs float64) float64 {
	if len(d) < 4 || d[3] <= d[0] {
		return math.NaN()
	}
	return 3 * fs / float64(d[3]-d[0])
}

// plateauISI returns the mean rate (1 / mean ISI, pps) and the ISI CoV
// (sample SD / mean) of the intervals whose both discharges lie in
// [p0, p1); NaN with fewer than 3 such intervals.
func plateauISI(d []int64, fs float64, p0, p1 int64) (rate, cov float64) {
	i := sort.Search(len(d), func(i int) bool { return d[i] >= p0 })
	var isi []float64
	for ; i+1 < len(d) && d[i+1] < p1; i++ {
		isi = append(isi, float64(d[i+1]-d[i])/fs)
	}
	if len(isi) < 3 {
		return math.NaN(), math.NaN()
	}
	var m float64
	for _, v := range isi {
		m += v
	}
	m /= float64(len(isi))
	var ss float64
	for _, v := range isi {
		ss += (v - m) * (v - m)
	}
	return 1 / m, math.Sqrt(ss/float64(len(isi)-1)) / m
}

// rateOfAgreement is common / (common + only-in-a + only-in-b) x 100 for
// two sorted discharge lists (exact sample match).
func rateOfAgreement(a, b []int64) float64 {
	i, j, common := 0, 0, 0
	for i < len(a) && j < len(b) {
		switch {
		case a[i] == b[j]:
			common++
			i++
			j++
		case a[i] < b[j]:
			i++
		default:
			j++
		}
	}
	tot := len(a) + len(b) - common
	if tot == 0 {
		return math.NaN()
	}
	return 100 * float64(common) / float64(tot)
}

// roundTo rounds v to the given number of decimals (no negative zero).
func roundTo(v float64, decimals int) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	s := math.Pow(10, float64(decimals))
	r := math.Round(v*s) / s
	if r == 0 {
		return 0
	}
	return r
}
