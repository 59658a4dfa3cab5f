package analysis

import (
	"fmt"
	"math"
	"strings"

	"muarc/record"
)

// SignalAt returns the value of s at time tS (seconds from the trial
// start), interpolating linearly between the samples on either side. Before
// the first sample or after the last it returns NaN.
func SignalAt(s record.Signal, tS float64) float64 {
	if !s.Present() {
		return math.NaN()
	}
	x := (tS - s.StartS) * s.SamplingRateHz
	n := len(s.Values)
	// A time within a thousandth of a sample of either end counts as on it.
	const eps = 1e-3
	if x < -eps || x > float64(n-1)+eps {
		return math.NaN()
	}
	if x <= 0 {
		return s.Values[0]
	}
	if x >= float64(n-1) {
		return s.Values[n-1]
	}
	i := int(x)
	f := x - float64(i)
	return s.Values[i]*(1-f) + s.Values[i+1]*f
}

// isPercent reports whether a UCUM unit string means percent (of MVC).
func isPercent(unit string) bool {
	u := strings.TrimSpace(unit)
	return u == "%" || strings.EqualFold(u, "%MVC") || u == "%{MVC}"
}

// ForceScale says how a trial's force values convert to % MVC and to force
// units.
type ForceScale struct {
	// ToPct multiplies a force value to give % MVC; NaN when the MVC is not
	// known (or the units disagree).
	ToPct float64
	// ToForce multiplies a force value to give force in Unit; NaN when not
	// known.
	ToForce float64
	// Unit is the UCUM unit of force figures (the MVC unit, or the trace's).
	Unit string
	// Note explains a conversion that is not possible; empty otherwise.
	Note string
}

// ScaleOf returns the conversion of the values of signal s of trial tr to
// % MVC and to force units. A trace in "%" is taken as % MVC; a trace in
// another unit (or none) is divided by the trial's MVC, whose unit must be
// the trace's when both are given.
func ScaleOf(tr *record.Trial, s record.Signal) ForceScale {
	mvcKnown := finite(tr.MVC) && tr.MVC > 0
	if isPercent(s.Unit) {
		sc := ForceScale{ToPct: 1, ToForce: math.NaN(), Unit: tr.MVCUnit}
		if mvcKnown {
			sc.ToForce = tr.MVC / 100
		} else {
			sc.Note = "force trace is in % MVC and the trial's MVC is not known: thresholds in force units are unknown"
		}
		return sc
	}
	sc := ForceScale{ToPct: math.NaN(), ToForce: 1, Unit: s.Unit}
	if sc.Unit == "" {
		sc.Unit = tr.MVCUnit
	}
	switch {
	case !mvcKnown:
		sc.Note = "the trial's MVC is not known: thresholds in % MVC are unknown"
	case s.Unit != "" && tr.MVCUnit != "" && s.Unit != tr.MVCUnit:
		sc.Note = fmt.Sprintf("force trace unit %q differs from the MVC unit %q: thresholds in %% MVC are unknown", s.Unit, tr.MVCUnit)
	default:
		sc.ToPct = 100 / tr.MVC
	}
	return sc
}
