package convert

import (
	"math"
	"strconv"
	"strings"

	"muarc/record"
)

// The "key: value" lines a lab writes above a table (the preamble): the
// sampling rate, the start time and other fields kept as metadata.

var rateKeys = []string{"sampling rate", "sampling_rate", "sampling rate hz", "sampling_rate_hz", "sample rate", "sample_rate", "rate", "fs", "sampling frequency", "sampling_frequency", "srate"}

func normKey(k string) string {
	l, _, _ := splitLabelUnit(k)
	return strings.ToLower(strings.TrimSpace(l))
}

func metaValue(meta []MetaLine, keys ...string) string {
	for _, m := range meta {
		nk := normKey(m.Key)
		for _, k := range keys {
			if nk == k {
				return m.Value
			}
		}
	}
	return ""
}

func metaLineOf(meta []MetaLine, keys ...string) int {
	for _, m := range meta {
		nk := normKey(m.Key)
		for _, k := range keys {
			if nk == k {
				return m.Line
			}
		}
	}
	return 0
}

// metaRate reads a "sampling rate: 2048 Hz" line; line 0 when there is
// none. A value that is not a finite positive number of hertz is an error
// naming the line.
func metaRate(file string, meta []MetaLine) (float64, int, error) {
	line := metaLineOf(meta, rateKeys...)
	if line == 0 {
		return 0, 0, nil
	}
	raw := metaValue(meta, rateKeys...)
	v := strings.TrimSpace(raw)
	v = strings.TrimSpace(strings.TrimSuffix(strings.TrimSuffix(v, "Hz"), "hz"))
	f, err := strconv.ParseFloat(v, 64)
	if err != nil || !(f > 0) || math.IsInf(f, 0) {
		return 0, line, perr(file, line, 0, "write the rate as a finite positive number in Hz (e.g. \"sampling rate: 2048 Hz\"), or give --rate", "sampling rate %q on the line above the table is not usable", raw)
	}
	return f, line, nil
}

var startKeys = []string{"start", "start_s", "start time", "start_time", "start time s", "start_time_s"}

// metaStart reads a "start: 0.5 s" or "start: 500 ms" line into seconds;
// line 0 when there is none. The unit comes from the value ("s", "ms"),
// the key ("start_s", "start [ms]") or, for 0 only, is not needed; any
// other value is an error naming the line, never ignored.
func metaStart(file string, meta []MetaLine) (float64, int, error) {
	line := metaLineOf(meta, startKeys...)
	if line == 0 {
		return 0, 0, nil
	}
	key := metaKeyOf(meta, line)
	raw := metaValue(meta, startKeys...)
	_, keyUnit, _ := splitLabelUnit(key)
	if nk := strings.ToLower(strings.TrimSpace(key)); strings.HasSuffix(nk, "_s") || strings.HasSuffix(nk, " s") {
		keyUnit = "s"
	}
	v := strings.TrimSpace(raw)
	unit := keyUnit
	for _, u := range []string{"ms", "s"} {
		if strings.HasSuffix(v, u) {
			if unit != "" && unit != u {
				unit = "?"
				break
			}
			unit, v = u, strings.TrimSpace(strings.TrimSuffix(v, u))
			break
		}
	}
	f, err := strconv.ParseFloat(v, 64)
	bad := func(why string) (float64, int, error) {
		return 0, line, perr(file, line, 0, "write the start time with its unit, e.g. \"start: 0.5 s\" or \"start: 500 ms\"", "start line %q: %s", key+": "+raw, why)
	}
	switch {
	case err != nil || math.IsNaN(f) || math.IsInf(f, 0):
		return bad("not a finite number of seconds or milliseconds")
	case unit == "?":
		return bad("the key and the value give different units")
	case unit == "ms":
		return f / 1000, line, nil
	case unit == "s" || f == 0:
		return f, line, nil
	}
	return bad("no unit: s or ms")
}

// MetaExtra turns the "key: value" lines into metadata fields: keys in
// snake_case, numbers as int64 or float64 when the value is one, else text.
// The keys the reader used itself (rate, start, unit) are left out.
func MetaExtra(meta []MetaLine) record.Extra {
	if len(meta) == 0 {
		return nil
	}
	used := map[string]bool{"unit": true, "units": true}
	for _, k := range rateKeys {
		used[k] = true
	}
	for _, k := range startKeys {
		used[k] = true
	}
	ex := record.Extra{}
	for _, m := range meta {
		if used[normKey(m.Key)] {
			continue
		}
		ex[snakeKey(m.Key)] = metaScalar(m.Value)
	}
	if len(ex) == 0 {
		return nil
	}
	return ex
}

func metaScalar(v string) any {
	if i, err := strconv.ParseInt(v, 10, 64); err == nil {
		return i
	}
	if f, err := strconv.ParseFloat(v, 64); err == nil && !math.IsInf(f, 0) && !math.IsNaN(f) {
		return f
	}
	switch strings.ToLower(v) {
	case "true", "yes":
		return true
	case "false", "no":
		return false
	}
	return v
}

// snakeKey makes an attribute name: lower case, runs of other characters
// turned into one '_' ("Amplifier Gain [V/V]" -> "amplifier_gain_v_v").
func snakeKey(k string) string {
	var b strings.Builder
	us := false
	for _, r := range strings.ToLower(strings.TrimSpace(k)) {
		if r >= 'a' && r <= 'z' || r >= '0' && r <= '9' {
			b.WriteRune(r)
			us = false
		} else if !us && b.Len() > 0 {
			b.WriteByte('_')
			us = true
		}
	}
	return strings.TrimSuffix(b.String(), "_")
}

func metaKeyOf(meta []MetaLine, line int) string {
	for _, m := range meta {
		if m.Line == line {
			return m.Key
		}
	}
	return ""
}
