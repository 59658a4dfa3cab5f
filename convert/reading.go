package convert

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// ProfileReading holds reading options given for one file role (force or
// EMG) in a profile or with --read; a member left empty (zero) takes the
// value of the profile's signals section.
type ProfileReading struct {
	Delimiter    string  `yaml:"delimiter" json:"delimiter"`
	DecimalComma string  `yaml:"decimal_comma" json:"decimal_comma"`
	Header       string  `yaml:"header" json:"header"`
	TimeColumn   string  `yaml:"time_column" json:"time_column"`
	TimeUnit     string  `yaml:"time_unit" json:"time_unit"`
	RateHz       float64 `yaml:"rate_hz" json:"rate_hz"`
	AllowGaps    *bool   `yaml:"allow_gaps" json:"allow_gaps"`
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
	var r *ProfileReading
	switch role {
	case "signals":
		s := &p.Signals
		r = &ProfileReading{Delimiter: s.Delimiter, DecimalComma: s.DecimalComma, Header: s.Header, TimeColumn: s.TimeColumn, TimeUnit: s.TimeUnit, RateHz: s.RateHz, AllowGaps: &s.AllowGaps}
		defer func() {
			s.Delimiter, s.DecimalComma, s.Header, s.TimeColumn, s.TimeUnit, s.RateHz, s.AllowGaps = r.Delimiter, r.DecimalComma, r.Header, r.TimeColumn, r.TimeUnit, r.RateHz, *r.AllowGaps
		}()
	case "force":
		r = &p.Force.ProfileReading
	case "emg":
		r = &p.EMG.ProfileReading
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
	case "allow_gaps":
		b, err := strconv.ParseBool(v)
		if err != nil {
			return bad("want true or false")
		}
		r.AllowGaps = &b
	default:
		return bad("signal files take delimiter, decimal_comma, header, time_column, time_unit, rate_hz and allow_gaps")
	}
	return nil
}

// readingFor gives the signal options of one role: the signals section with
// the role's own members over it.
func (p *Profile) readingFor(role string) SignalOptions {
	o := p.signalOptions()
	r := p.Force.ProfileReading
	if role == "emg" {
		r = p.EMG.ProfileReading
	}
	if r.Delimiter != "" {
		o.Delimiter, _ = ParseDelimiter(r.Delimiter)
	}
	if r.DecimalComma != "" {
		o.DecimalComma = r.DecimalComma
	}
	if r.Header != "" {
		o.Header = r.Header
	}
	if r.TimeColumn != "" {
		o.TimeColumn = r.TimeColumn
	}
	if r.TimeUnit != "" {
		o.TimeUnit = r.TimeUnit
	}
	if r.RateHz != 0 {
		o.RateHz = r.RateHz
	}
	if r.AllowGaps != nil {
		o.AllowGaps = *r.AllowGaps
	}
	return o
}

// checkReading checks a role's members as the profile is loaded.
func (r *ProfileReading) check(role string) error {
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
	return nil
}
