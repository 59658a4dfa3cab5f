package convert

import (
	"fmt"
	"strings"
)

// Overrides are reading options given on the command line, each named
// after its flag in errors; "" (FirstIndex -1, ToleranceSamples 0) leaves
// the profile's value.
type Overrides struct {
	Delimiter, DecimalComma, Header, TimeColumn, TimeUnit      string
	Shape, TimeBase, Labels                                    string
	DischargeDelimiter, DischargeDecimalComma, DischargeHeader string
	FirstIndex                                                 int
	ToleranceSamples                                           float64
	AllowOutOfRange                                            bool
	// Read holds --read ROLE.MEMBER=VALUE options (SetReading).
	Read []string
}

// Override applies command-line reading options over the profile.
func (p *Profile) Override(fl Overrides) error {
	set := func(flag string, dst *string, v string, ok ...string) error {
		if v == "" {
			return nil
		}
		if len(ok) > 0 {
			found := false
			for _, o := range ok {
				found = found || o == v
			}
			if !found {
				return fmt.Errorf("--%s %q: want one of %s", flag, v, strings.Join(ok, ", "))
			}
		}
		*dst = v
		return nil
	}
	if _, err := ParseDelimiter(fl.Delimiter); err != nil {
		return fmt.Errorf("--%s", err)
	}
	for _, e := range []error{
		set("delimiter", &p.Signals.Delimiter, fl.Delimiter),
		set("decimal-comma", &p.Signals.DecimalComma, fl.DecimalComma, "auto", "yes", "no"),
		set("header", &p.Signals.Header, fl.Header, "auto", "yes", "no"),
		set("time-column", &p.Signals.TimeColumn, fl.TimeColumn),
		set("time-unit", &p.Signals.TimeUnit, fl.TimeUnit, "s", "ms", "samples"),
		set("shape", &p.Discharges.Shape, fl.Shape, ShapeLong, ShapeColumns, ShapeLines, ShapeMatrix),
		set("time-base", &p.Discharges.TimeBase, fl.TimeBase, "s", "ms", "samples"),
		set("labels", &p.Discharges.Labels, fl.Labels, "yes", "no"),
		set("discharge-delimiter", &p.Discharges.Delimiter, fl.DischargeDelimiter, "comma", "semicolon", "tab", "whitespace", ",", ";"),
		set("discharge-decimal-comma", &p.Discharges.DecimalComma, fl.DischargeDecimalComma, "yes", "no"),
		set("discharge-header", &p.Discharges.Header, fl.DischargeHeader, "yes", "no"),
	} {
		if e != nil {
			return e
		}
	}
	switch fl.FirstIndex {
	case -1:
	case 0, 1:
		fi := fl.FirstIndex
		p.Discharges.FirstIndex = &fi
	default:
		return fmt.Errorf("--first-index %d: want 0 or 1", fl.FirstIndex)
	}
	if fl.AllowOutOfRange {
		yes := true
		p.Signals.AllowOutOfRange = &yes
	}
	for _, r := range fl.Read {
		if err := p.SetReading(r); err != nil {
			return err
		}
	}
	if fl.ToleranceSamples < 0 {
		return fmt.Errorf("--tolerance %g: want a positive number of samples", fl.ToleranceSamples)
	}
	if fl.ToleranceSamples > 0 {
		p.Discharges.ToleranceSamples = fl.ToleranceSamples
	}
	return nil
}
