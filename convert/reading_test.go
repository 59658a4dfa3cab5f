package convert

import (
	"strings"
	"testing"

	"muarc/record"
)

// A profile written with the members of earlier versions (signals with
// allow_gaps and allow_out_of_range as booleans, force and emg with their
// own reading members) loads unchanged into the one ProfileSignals type,
// and each role gets the signals section with its own members over it.
func TestProfileSignalsOldSpellingsLoad(t *testing.T) {
	for _, c := range []struct{ name, text string }{
		{"p.yaml", `signals:
  delimiter: semicolon
  decimal_comma: "yes"
  allow_gaps: true
  dtype: float32
  allow_out_of_range: true
force:
  column: Kraft
  rate_hz: 100
  time_column: none
emg:
  time_column: first
  time_unit: ms
  allow_gaps: false
`},
		{"p.json", `{"signals": {"delimiter": "semicolon", "decimal_comma": "yes", "allow_gaps": true, "dtype": "float32", "allow_out_of_range": true},
 "force": {"column": "Kraft", "rate_hz": 100, "time_column": "none"},
 "emg": {"time_column": "first", "time_unit": "ms", "allow_gaps": false}}`},
	} {
		p, err := LoadProfile(writeTemp(t, c.name, c.text))
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		f, e := p.readingFor("force"), p.readingFor("emg")
		if f.Delimiter != ';' || f.DecimalComma != "yes" || !f.AllowGaps || f.RateHz != 100 || f.TimeColumn != "none" || !f.AllowOutOfRange || f.DType != record.Float32 {
			t.Errorf("%s: force options %+v", c.name, f)
		}
		if e.Delimiter != ';' || e.AllowGaps || e.RateHz != 0 || e.TimeColumn != "first" || e.TimeUnit != "ms" || !e.AllowOutOfRange {
			t.Errorf("%s: emg options %+v", c.name, e)
		}
		if p.Force.Column != "Kraft" || !p.allowOutOfRange() {
			t.Errorf("%s: force column %q, unit tables allow_out_of_range %v", c.name, p.Force.Column, p.allowOutOfRange())
		}
	}
}

func TestSetReadingPerRole(t *testing.T) {
	p := DefaultProfile()
	for _, o := range []string{"signals.rate_hz=2000", "emg.rate_hz=2048", "force.time_column=none", "emg.allow_out_of_range=true", "emg.dtype=float64", "units.delimiter=semicolon"} {
		if err := p.SetReading(o); err != nil {
			t.Fatalf("%s: %v", o, err)
		}
	}
	f, e := p.readingFor("force"), p.readingFor("emg")
	if f.RateHz != 2000 || f.TimeColumn != "none" || f.AllowOutOfRange || e.RateHz != 2048 || !e.AllowOutOfRange || e.DType != record.Float64 {
		t.Errorf("force %+v\nemg %+v", f, e)
	}
	for o, want := range map[string]string{
		"force.dtype=float32":  "force traces are always stored as float64",
		"emg.rate_hz=NaN":      "finite positive number",
		"emg.colour=red":       "signal files take delimiter, decimal_comma",
		"trigger.rate_hz=2048": `no role "trigger"`,
		"emg.rate_hz":          "write ROLE.MEMBER=VALUE",
	} {
		if err := p.SetReading(o); err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), o) {
			t.Errorf("%s: got %v, want %q and the option", o, err, want)
		}
	}
	if _, err := LoadProfile(writeTemp(t, "p.yaml", "force:\n  dtype: float32\n")); err == nil || !strings.Contains(err.Error(), "force: dtype") {
		t.Errorf("force.dtype in a profile: %v", err)
	}
}
