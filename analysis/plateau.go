package analysis

import (
	"math"

	"muarc/record"
)

// Plateau is the steady part of a trapezoidal contraction, in seconds from
// the trial start.
type Plateau struct {
	StartS float64 `json:"start_s"`
	EndS   float64 `json:"end_s"`
	// LevelPctMVC is the plateau level found, % MVC (NaN when the MVC is
	// not known).
	LevelPctMVC float64 `json:"level_pct_mvc"`
	// From is "force_target" or "force": the trace the plateau was found on.
	From string `json:"from"`
	// ForceMeanPctMVC is the mean measured force over the plateau and
	// TrackingRMSPctMVC the root mean square of force minus target there,
	// both % MVC; NaN when the trial lacks a trace or the MVC.
	ForceMeanPctMVC   float64 `json:"force_mean_pct_mvc"`
	TrackingRMSPctMVC float64 `json:"tracking_rms_pct_mvc"`
}

// tracking fills the force figures of p from the trial's traces, sampling
// the force at its own times and the target at the same times.
func (p *Plateau) tracking(tr *record.Trial) {
	p.ForceMeanPctMVC, p.TrackingRMSPctMVC = math.NaN(), math.NaN()
	f := tr.Force
	if !f.Present() {
		return
	}
	fs := ScaleOf(tr, f)
	ts := ScaleOf(tr, tr.ForceTarget)
	var sum, ss float64
	n, m := 0, 0
	for i, v := range f.Values {
		t := f.StartS + float64(i)/f.SamplingRateHz
		if t < p.StartS || t > p.EndS {
			continue
		}
		sum += v * fs.ToPct
		n++
		if tr.ForceTarget.Present() {
			if g := SignalAt(tr.ForceTarget, t); !math.IsNaN(g) {
				d := v*fs.ToPct - g*ts.ToPct
				ss += d * d
				m++
			}
		}
	}
	if n > 0 {
		p.ForceMeanPctMVC = sum / float64(n)
	}
	if m > 0 {
		p.TrackingRMSPctMVC = math.Sqrt(ss / float64(m))
	}
}

// DurationS is the plateau length in seconds.
func (p Plateau) DurationS() float64 { return p.EndS - p.StartS }

// Tolerances for finding the plateau (see FindPlateau).
const (
	// PlateauTargetTol is the band below the target's peak, as a fraction of
	// the peak, within which the target counts as on its plateau: 1 %.
	PlateauTargetTol = 0.01
	// PlateauForceTol is the band below the smoothed force's peak, as a
	// fraction of the peak, used when there is no target: 10 %.
	PlateauForceTol = 0.10
	// PlateauForceSmoothS is the moving-mean window applied to the force
	// before finding its plateau when there is no target: 0.5 s.
	PlateauForceSmoothS = 0.5
)

// FindPlateau finds the plateau of trial tr. With a force target it is the
// longest run of target samples within PlateauTargetTol of the target's
// peak (the target is a drawn trapezoid: ramp up, plateau, ramp down). With
// no target it is the longest run of the force, smoothed by a
// PlateauForceSmoothS moving mean, within PlateauForceTol of its peak. The
// run spans from its first to its last sample time. The force's mean and
// its RMS deviation from the target over the plateau say how well the
// target was held. ok is false when the
// trial has neither trace or the trace is flat at zero.
func FindPlateau(tr *record.Trial) (p Plateau, ok bool) {
	s, from, tol := tr.ForceTarget, "force_target", PlateauTargetTol
	vals := s.Values
	if !s.Present() {
		s, from, tol = tr.Force, "force", PlateauForceTol
		if !s.Present() {
			return Plateau{}, false
		}
		vals = movingMean(s.Values, int(math.Round(PlateauForceSmoothS*s.SamplingRateHz)))
	}
	peak := math.Inf(-1)
	for _, v := range vals {
		if v > peak {
			peak = v
		}
	}
	if !(peak > 0) {
		return Plateau{}, false
	}
	lo := peak * (1 - tol)
	bestA, bestB, a := -1, -1, -1
	for i := 0; i <= len(vals); i++ {
		on := i < len(vals) && vals[i] >= lo
		if on && a < 0 {
			a = i
		}
		if !on && a >= 0 {
			if i-a > bestB-bestA {
				bestA, bestB = a, i
			}
			a = -1
		}
	}
	var sum float64
	for _, v := range vals[bestA:bestB] {
		sum += v
	}
	level := sum / float64(bestB-bestA) * ScaleOf(tr, s).ToPct
	p = Plateau{
		StartS:      s.StartS + float64(bestA)/s.SamplingRateHz,
		EndS:        s.StartS + float64(bestB-1)/s.SamplingRateHz,
		LevelPctMVC: level,
		From:        from,
	}
	p.tracking(tr)
	return p, true
}

// movingMean returns the centred moving mean of v over w samples (shorter
// at the ends).
func movingMean(v []float64, w int) []float64 {
	if w < 2 {
		return v
	}
	out := make([]float64, len(v))
	prefix := make([]float64, len(v)+1)
	for i, x := range v {
		prefix[i+1] = prefix[i] + x
	}
	h := w / 2
	for i := range v {
		a, b := i-h, i+w-h
		if a < 0 {
			a = 0
		}
		if b > len(v) {
			b = len(v)
		}
		out[i] = (prefix[b] - prefix[a]) / float64(b-a)
	}
	return out
}
