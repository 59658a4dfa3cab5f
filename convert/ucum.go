package convert

import (
	"fmt"
	"strings"
)

// The units accepted in headers, written in UCUM's case-sensitive form
// (The Unified Code for Units of Measure, Regenstrief Institute). Only the
// atoms that turn up in force, EMG and motor-unit tables are known; a unit
// outside them is refused so that nothing is guessed.
var ucumAtoms = map[string]bool{
	"s": true, "min": true, "h": true, "Hz": true,
	"V": true, "A": true, "Ohm": true, "F": true,
	"N": true, "g": true, "m": true, "Pa": true, "W": true, "J": true,
	"rad": true, "deg": true, "B": true, "%": true, "1": true,
	"kg": true, "cm": true, "mm": true, "ms": true, "us": true,
}

// ucumPrefixes are the SI prefixes in UCUM's case-sensitive form.
var ucumPrefixes = []string{"da", "k", "M", "G", "T", "h", "d", "c", "m", "u", "n", "p", "f"}

// unitSpellings maps spellings seen in lab exports to UCUM. The micro sign
// (U+00B5) and the Greek small mu (U+03BC) are both UCUM's "u".
var unitSpellings = map[string]string{
	"Nm": "N.m", "N·m": "N.m", "N*m": "N.m", "N m": "N.m",
	"sec": "s", "secs": "s", "msec": "ms",
	"pps": "/s", "Hz ": "Hz", "1/s": "/s",
	"%MVC": "%", "% MVC": "%", "%mvc": "%",
	"dB": "dB", "ohm": "Ohm", "Ω": "Ohm", "kΩ": "kOhm",
	"°": "deg",
}

// NormalizeUnit turns a unit as written in a header into UCUM ("µV" and
// "uV" both give "uV"). It returns an error for a unit it cannot read.
func NormalizeUnit(u string) (string, error) {
	u = strings.TrimSpace(u)
	if u == "" {
		return "", nil
	}
	if s, ok := unitSpellings[u]; ok {
		return s, nil
	}
	u = strings.ReplaceAll(u, "\u00b5", "u")
	u = strings.ReplaceAll(u, "\u03bc", "u")
	u = strings.ReplaceAll(u, "·", ".")
	if s, ok := unitSpellings[u]; ok {
		return s, nil
	}
	if !validUCUM(u) {
		return "", fmt.Errorf("unit %q is not a UCUM unit muarc knows", u)
	}
	return u, nil
}

// validUCUM checks a term of atoms joined by '.' and '/', each atom with an
// optional prefix and an optional integer exponent, e.g. "N.m", "m/s2", "/s".
func validUCUM(u string) bool {
	if u == "" {
		return false
	}
	if u[0] == '/' {
		u = "1" + u
	}
	for _, part := range strings.FieldsFunc(u, func(r rune) bool { return r == '.' || r == '/' }) {
		if !validAtom(part) {
			return false
		}
	}
	return !strings.Contains(u, "..") && !strings.Contains(u, "//") &&
		!strings.HasSuffix(u, ".") && !strings.HasSuffix(u, "/")
}

func validAtom(a string) bool {
	if strings.HasPrefix(a, "{") && strings.HasSuffix(a, "}") && len(a) > 2 {
		return true // an annotation such as {pulses}
	}
	// Strip an integer exponent (m2, s-1).
	j := len(a)
	for j > 0 && a[j-1] >= '0' && a[j-1] <= '9' {
		j--
	}
	if j > 0 && a[j-1] == '-' {
		j--
	}
	if j > 0 && j < len(a) {
		a = a[:j]
	}
	if ucumAtoms[a] {
		return true
	}
	for _, p := range ucumPrefixes {
		if strings.HasPrefix(a, p) && len(a) > len(p) && ucumAtoms[a[len(p):]] && a[len(p):] != "%" && a[len(p):] != "1" {
			return true
		}
	}
	return false
}

// splitLabelUnit splits a header cell "Force [N]" or "EMG 12 (uV)" into the
// label and the unit text in brackets or parentheses at its end.
func splitLabelUnit(cell string) (label, unit string, hasUnit bool) {
	c := strings.TrimSpace(cell)
	if n := len(c); n > 0 {
		var open byte
		switch c[n-1] {
		case ']':
			open = '['
		case ')':
			open = '('
		}
		if open != 0 {
			if i := strings.LastIndexByte(c, open); i >= 0 {
				return strings.TrimSpace(c[:i]), strings.TrimSpace(c[i+1 : n-1]), true
			}
		}
	}
	return c, "", false
}
