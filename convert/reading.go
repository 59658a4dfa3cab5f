package convert

import (
	"fmt"
	"math"
	"muarc/record"
	"strconv"
	"strings"
)

// ProfileSignals holds the reading options of signal files: the profile's
// signals section (every force and EMG file), and the force and emg
// sections' own members over it for that role only. A member left empty
// (zero, nil) takes the value of the section below it: the role's, then
// signals, then detection. One type for the three, so a member means the
// same wherever it is written; earlier profiles load unchanged (the same
// member names; allow_gaps and allow_out_of_range as true or false).
type ProfileSignals struct {
	Delimiter    string  `yaml:"delimiter" json:"delimiter"`
	DecimalComma string  `yaml:"decimal_comma" json:"decimal_comma"`
	Header       string  `yaml:"header" json:"header"`
	TimeColumn   string  `yaml:"time_column" json:"time_column"`
	TimeUnit     string  `yaml:"time_unit" json:"time_unit"`
	RateHz       float64 `yaml:"rate_hz" json:"rate_hz"`
	AllowGaps    *bool   `yaml:"allow_gaps" json:"allow_gaps"`
	// DType forces the EMG sample type (float32 or float64); force traces
	// are always float64.
	DType string `yaml:"dtype" json:"dtype"`
	// AllowOutOfRange stores infinity words and numbers beyond float64
	// as ±Inf and non-zero numbers below it as 0 instead of refusing them.
	AllowOutOfRange *bool `yaml:"allow_out_of_range" json:"allow_out_of_range"`
}

// over gives o with the members set in s put over it.
func (s *ProfileSignals) over(o SignalOptions) SignalOptions {
	if s.Delimiter != "" {
		o.Delimiter, _ = ParseDelimiter(s.Delimiter)
	}
	if s.DecimalComma != "" {
		o.DecimalComma = s.DecimalComma
	}
	if s.Header != "" {
		o.Header = s.Header
	}
	if s.TimeColumn != "" {
		o.TimeColumn = s.TimeColumn
	}
	if s.TimeUnit != "" {
		o.TimeUnit = s.TimeUnit
	}
	if s.RateHz != 0 {
		o.RateHz = s.RateHz
	}
	if s.AllowGaps != nil {
		o.AllowGaps = *s.AllowGaps
	}
	if s.DType != "" {
		o.DType = record.SampleType(s.DType)
	}
	if s.AllowOutOfRange != nil {
		o.AllowOutOfRange = *s.AllowOutOfRange
	}
	return o
}

// allowOutOfRange is the signals section's allow_out_of_range (unit
// tables follow it too).
func (p *Profile) allowOutOfRange() bool {
	return p.Signals.AllowOutOfRange != nil && *p.Signals.AllowOutOfRange
}

// ProfileTableReading holds the dialect of unit tables.
type ProfileTableReading struct {
	Delimiter    string `yaml:"delimiter" json:"delimiter"`
	DecimalComma string `yaml:"decimal_comma" json:"decimal_comma"`
}

// ReadingRoles lists the roles --read ROLE.MEMBER=VALUE accepts.
var ReadingRoles = []string{"signals", "force", "emg", "discharges", "units"}

// SetReading sets one reading option from the command line, "ROLE.MEMBER=
// VALUE" (e.g. "emg.rate_hz=2048", "force.time_column=none",
// "units.delimiter=semicolon"), with the member names of the profile. The
// error names the option as given.
func (p *Profile) SetReading(opt string) error {
	bad := func(format string, args ...any) error {
		return fmt.Errorf("--read %q: %s", opt, fmt.Sprintf(format, args...))
	}
	kv := strings.SplitN(opt, "=", 2)
	rm := strings.SplitN(kv[0], ".", 2)
	if len(kv) != 2 || len(rm) != 2 {
		return bad("write ROLE.MEMBER=VALUE, e.g. emg.rate_hz=2048 (roles: %s)", strings.Join(ReadingRoles, ", "))
	}
	role, member, v := strings.TrimSpace(rm[0]), strings.TrimSpace(rm[1]), strings.TrimSpace(kv[1])
	oneOf := func(dst *string, ok ...string) error {
		for _, o := range ok {
			if v == o {
				*dst = v
				return nil
			}
		}
		return bad("want one of %s", strings.Join(ok, ", "))
	}
	delim := func(dst *string) error {
		if _, err := ParseDelimiter(v); err != nil {
			return bad("want auto, comma, semicolon, tab or whitespace")
		}
		*dst = v
		return nil
	}
	var r *ProfileSignals
	switch role {
	case "signals":
		r = &p.Signals
	case "force":
		r = &p.Force.ProfileSignals
	case "emg":
		r = &p.EMG.ProfileSignals
	case "units":
		switch member {
		case "delimiter":
			return delim(&p.Units.Delimiter)
		case "decimal_comma":
			return oneOf(&p.Units.DecimalComma, "auto", "yes", "no")
		}
		return bad("unit tables take delimiter and decimal_comma")
	case "discharges":
		switch member {
		case "shape":
			return oneOf(&p.Discharges.Shape, ShapeLong, ShapeColumns, ShapeLines, ShapeMatrix)
		case "time_base":
			return oneOf(&p.Discharges.TimeBase, "s", "ms", "samples")
		case "first_index":
			i, err := strconv.Atoi(v)
			if err != nil || i != 0 && i != 1 {
				return bad("want 0 or 1")
			}
			p.Discharges.FirstIndex = &i
			return nil
		}
		return bad("discharge files take shape, time_base and first_index here (see --help for the discharge flags)")
	default:
		return bad("no role %q; roles: %s", role, strings.Join(ReadingRoles, ", "))
	}
	switch member {
	case "delimiter":
		return delim(&r.Delimiter)
	case "decimal_comma":
		return oneOf(&r.DecimalComma, "auto", "yes", "no")
	case "header":
		return oneOf(&r.Header, "auto", "yes", "no")
	case "time_column":
		if v == "" {
			return bad("want auto, none, first or a column label")
		}
		r.TimeColumn = v
	case "time_unit":
		return oneOf(&r.TimeUnit, "s", "ms", "samples")
	case "rate_hz":
		f, err := strconv.ParseFloat(v, 64)
		if err != nil || !(f > 0) || math.IsInf(f, 0) {
			return bad("want a finite positive number of hertz")
		}
		r.RateHz = f
	case "allow_gaps", "allow_out_of_range":
		b, err := strconv.ParseBool(v)
		if err != nil {
			return bad("want true or false")
		}
		if member == "allow_gaps" {
			r.AllowGaps = &b
		} else {
			r.AllowOutOfRange = &b
		}
	case "dtype":
		if role == "force" {
			return bad("force traces are always stored as float64; dtype is for emg (or signals)")
		}
		return oneOf(&r.DType, "float32", "float64")
	default:
		return bad("signal files take %s", strings.Join(signalMembers, ", "))
	}
	return nil
}

// signalMembers are the members of a signals, force or emg section that
// --read takes.
var signalMembers = []string{"delimiter", "decimal_comma", "header", "time_column", "time_unit", "rate_hz", "allow_gaps", "dtype", "allow_out_of_range"}

// readingFor gives the signal options of one role ("force" or "emg"): the
// signals section with the role's own members over it.
func (p *Profile) readingFor(role string) SignalOptions {
	o := p.Signals.over(SignalOptions{})
	if role == "emg" {
		return p.EMG.over(o)
	}
	return p.Force.over(o)
}

// check checks a section's members as the profile is loaded.
func (r *ProfileSignals) check(role string) error {
	if _, err := ParseDelimiter(r.Delimiter); err != nil {
		return fmt.Errorf("%s: %v", role, err)
	}
	for member, v := range map[string]string{"decimal_comma": r.DecimalComma, "header": r.Header} {
		switch v {
		case "", "auto", "yes", "no":
		default:
			return fmt.Errorf("%s: %s %q: want auto, yes or no", role, member, v)
		}
	}
	switch r.TimeUnit {
	case "", "s", "ms", "samples":
	default:
		return fmt.Errorf("%s: time_unit %q: want s, ms or samples", role, r.TimeUnit)
	}
	if r.RateHz < 0 || math.IsNaN(r.RateHz) || math.IsInf(r.RateHz, 0) {
		return fmt.Errorf("%s: rate_hz %g: want a finite positive number of hertz", role, r.RateHz)
	}
	switch {
	case r.DType != "" && role == "force":
		return fmt.Errorf("force: dtype %q: force traces are always stored as float64 (dtype is for emg or signals)", r.DType)
	case r.DType != "" && r.DType != "float32" && r.DType != "float64":
		return fmt.Errorf("%s: dtype %q: write float32 or float64, or leave it out", role, r.DType)
	}
	return nil
}
