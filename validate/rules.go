package validate

import (
	"errors"
	"fmt"
	"math"
	"muarc/internal/docload"
	"strings"
)

// Rules are the thresholds of the content checks and the checks switched
// off or re-ranked. Start from DefaultRules; a rules file (LoadRules) changes
// only the fields it names.
type Rules struct {
	// SilhouetteMin: a unit whose silhouette is below it is low-confidence
	// (dimensionless, 0..1).
	SilhouetteMin float64 `json:"silhouette_min" yaml:"silhouette_min"`
	// PNRMinDB: a unit whose pulse-to-noise ratio is below it is
	// low-confidence (dB).
	PNRMinDB float64 `json:"pnr_min_db" yaml:"pnr_min_db"`
	// DoubletISIMs: an inter-discharge interval shorter than this is a
	// doublet (ms).
	DoubletISIMs float64 `json:"doublet_isi_ms" yaml:"doublet_isi_ms"`
	// MaxRatePPS: a rate above this over SustainedISIs consecutive
	// intervals is flagged (pulses per second).
	MaxRatePPS float64 `json:"max_rate_pps" yaml:"max_rate_pps"`
	// SustainedISIs is how many consecutive intervals make a rate
	// "sustained" (count, >= 1).
	SustainedISIs int `json:"sustained_isis" yaml:"sustained_isis"`
	// MinDischarges: a unit with fewer discharges is flagged (count).
	MinDischarges int `json:"min_discharges" yaml:"min_discharges"`
	// EMGMinRateHz: surface EMG sampled below this is flagged (Hz).
	EMGMinRateHz float64 `json:"emg_min_rate_hz" yaml:"emg_min_rate_hz"`
	// TargetMaxPctMVC: a target level above this is flagged (% MVC).
	TargetMaxPctMVC float64 `json:"target_max_pct_mvc" yaml:"target_max_pct_mvc"`
	// ForceUnits are the UCUM units accepted for force traces and MVC
	// values (case-sensitive UCUM codes).
	ForceUnits []string `json:"force_units" yaml:"force_units"`
	// Disabled lists check ids (or "prefix.*") whose findings are dropped.
	Disabled []string `json:"disabled" yaml:"disabled"`
	// Severity re-ranks checks: id (or "prefix.*") -> "note", "warning" or
	// "error". Applied before Options.Strict.
	Severity map[string]string `json:"severity" yaml:"severity"`
}

// DefaultRules returns the built-in thresholds.
func DefaultRules() Rules {
	return Rules{
		// Silhouette >= 0.90 as the acceptance gate for a decomposed unit
		// is common practice in HD-sEMG decomposition studies (from memory).
		SilhouetteMin: 0.90,
		// PNR >= 30 dB as the gate for an accurately identified unit is
		// common practice (from memory).
		PNRMinDB: 30,
		// Intervals under ~20 ms (instantaneous rate > 50 pps) are called
		// doublets: common practice (from memory).
		DoubletISIMs: 20,
		// Sustained voluntary discharge rates rarely exceed ~50 pps in
		// submaximal contractions: common practice.
		MaxRatePPS: 50,
		// Five consecutive intervals make a rate "sustained": our choice,
		// long enough that one doublet does not trip it.
		SustainedISIs: 5,
		// A unit with fewer than 10 discharges gives no usable rate or
		// CoV: our choice (common practice sets similar floors).
		MinDischarges: 10,
		// Surface EMG is commonly sampled at 1 kHz or more (its band
		// reaches ~400-500 Hz): common practice, from memory.
		EMGMinRateHz: 1000,
		// A target above 100 % MVC means the MVC or the target is wrong.
		TargetMaxPctMVC: 100,
		// UCUM codes of force, torque, mass-as-force, % of MVC and raw
		// transducer voltage (UCUM table, from memory).
		ForceUnits: []string{"N", "kN", "mN", "N.m", "N.cm", "mN.m", "kN.m", "kg", "g", "kgf", "gf", "[lbf_av]", "%", "1", "V", "mV"},
	}
}

// isZero reports whether r is the zero Rules (no thresholds at all), which
// File treats as DefaultRules.
func (r Rules) isZero() bool {
	return r.SilhouetteMin == 0 && r.PNRMinDB == 0 && r.DoubletISIMs == 0 && r.MaxRatePPS == 0 &&
		r.SustainedISIs == 0 && r.MinDischarges == 0 && r.EMGMinRateHz == 0 && r.TargetMaxPctMVC == 0 &&
		r.ForceUnits == nil && r.Disabled == nil && r.Severity == nil
}

// Check returns nil when the rules are usable, or an error naming the bad
// field.
func (r Rules) Check() error {
	num := []struct {
		name string
		v    float64
	}{
		{"silhouette_min", r.SilhouetteMin}, {"pnr_min_db", r.PNRMinDB}, {"doublet_isi_ms", r.DoubletISIMs},
		{"max_rate_pps", r.MaxRatePPS}, {"emg_min_rate_hz", r.EMGMinRateHz}, {"target_max_pct_mvc", r.TargetMaxPctMVC},
	}
	for _, n := range num {
		if math.IsNaN(n.v) || math.IsInf(n.v, 0) {
			return fmt.Errorf("%s: %v is not a finite number", n.name, n.v)
		}
		if n.v < 0 && n.name != "pnr_min_db" {
			return fmt.Errorf("%s: %v is negative", n.name, n.v)
		}
	}
	if r.SilhouetteMin > 1 {
		return fmt.Errorf("silhouette_min: %v is above 1 (silhouette runs 0..1)", r.SilhouetteMin)
	}
	if r.SustainedISIs < 1 {
		return fmt.Errorf("sustained_isis: %d, want 1 or more", r.SustainedISIs)
	}
	if r.MinDischarges < 0 {
		return fmt.Errorf("min_discharges: %d is negative", r.MinDischarges)
	}
	for _, d := range r.Disabled {
		if !knownPattern(d) {
			return fmt.Errorf("disabled: %q is no check id (see `muarc validate --list-checks`)", d)
		}
	}
	for k, v := range r.Severity {
		if !knownPattern(k) {
			return fmt.Errorf("severity: %q is no check id (see `muarc validate --list-checks`)", k)
		}
		if _, err := ParseSeverity(v); err != nil {
			return fmt.Errorf("severity: %s: %v", k, err)
		}
	}
	return nil
}

// LoadRules reads a rules file over DefaultRules: JSON when the name ends in
// ".json", YAML when in ".yaml" or ".yml" (internal/docload). Fields the file leaves out keep their defaults;
// unknown fields are an error (a misspelt threshold must not pass silently).
func LoadRules(path string) (Rules, error) {
	b, err := docload.ReadFile(path)
	if err != nil {
		return Rules{}, err
	}
	return parseRules(b, path)
}

func parseRules(b []byte, path string) (Rules, error) {
	r := DefaultRules()
	if err := docload.Decode(path, b, &r); err != nil {
		var de *docload.Error
		if errors.As(err, &de) && strings.HasPrefix(de.Msg, "unknown member") {
			de.Hint = "known fields: the json/yaml names in `muarc validate --help`"
		}
		return Rules{}, err
	}
	if err := r.Check(); err != nil {
		return Rules{}, fmt.Errorf("%s: %w", path, err)
	}
	return r, nil
}

// disabled reports whether findings of check id are dropped.
func (r Rules) disabled(id string) bool {
	for _, d := range r.Disabled {
		if d == "*" || matchCheck(d, id) {
			return true
		}
	}
	return false
}

// severity gives the severity of check id under these rules: an exact id
// beats a prefix pattern.
func (r Rules) severity(id string) Severity {
	if w, ok := r.Severity[id]; ok {
		s, _ := ParseSeverity(w)
		return s
	}
	best := ""
	for k := range r.Severity {
		if matchCheck(k, id) && len(k) > len(best) {
			best = k
		}
	}
	if best != "" {
		s, _ := ParseSeverity(r.Severity[best])
		return s
	}
	return defaultSeverity(id)
}

// forceUnitKnown reports whether u is one of the accepted force units.
func (r Rules) forceUnitKnown(u string) bool {
	for _, k := range r.ForceUnits {
		if k == u {
			return true
		}
	}
	return false
}
