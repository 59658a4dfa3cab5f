package deid

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// OldestBand is the single category Safe Harbor requires for every age over
// 89 (45 CFR 164.514(b)(2)(i)(C)).
const OldestBand = "90 or older"

// AgeBand returns the band of an age in years: "lo-hi" with lo a multiple of
// width (e.g. 34.7 with width 10 -> "30-39"), bands ending at 89 at most,
// and OldestBand for every age of 90 or more. It returns "" for NaN or a
// negative age.
func AgeBand(ageYears float64, width int) string {
	if math.IsNaN(ageYears) || ageYears < 0 || math.IsInf(ageYears, 0) {
		return ""
	}
	if width < 1 {
		width = 1
	}
	a := int(math.Floor(ageYears))
	if a >= 90 {
		return OldestBand
	}
	lo := a / width * width
	hi := lo + width - 1
	if hi > 89 {
		hi = 89
	}
	if lo == hi {
		return strconv.Itoa(lo)
	}
	return fmt.Sprintf("%d-%d", lo, hi)
}

// parseBand reads "lo-hi", "lo" or "lo or older" (hi = +Inf).
func parseBand(s string) (lo, hi float64, ok bool) {
	s = strings.TrimSpace(s)
	if rest, found := strings.CutSuffix(s, " or older"); found {
		v, err := strconv.ParseFloat(strings.TrimSpace(rest), 64)
		return v, math.Inf(1), err == nil
	}
	if a, b, found := strings.Cut(s, "-"); found && a != "" {
		x, err1 := strconv.ParseFloat(strings.TrimSpace(a), 64)
		y, err2 := strconv.ParseFloat(strings.TrimSpace(b), 64)
		return x, y, err1 == nil && err2 == nil && x <= y
	}
	v, err := strconv.ParseFloat(s, 64)
	return v, v, err == nil
}

// NormalizeAgeBand makes a recorded age band safe under Safe Harbor: a band
// that lies wholly at 90 or above becomes OldestBand, a band that reaches
// above 89 from below becomes "<lo> or older" (it must not single out ages
// over 89), a band wholly below 90 is kept. ok is false when s is not a band
// muarc can read; it is then dropped.
func NormalizeAgeBand(s string) (band string, ok bool) {
	lo, hi, ok := parseBand(s)
	if !ok || lo < 0 {
		return "", false
	}
	switch {
	case lo >= 90:
		return OldestBand, true
	case hi > 89:
		return fmt.Sprintf("%s or older", strconv.FormatFloat(lo, 'f', -1, 64)), true
	}
	return strings.TrimSpace(s), true
}

// MeasureBand returns "lo-hi" for a value in a band of width (e.g. 172.5 cm
// with width 10 -> "170-180"): lo = floor(v/width)*width, hi = lo+width, the
// band holding lo <= v < hi. "" for NaN.
func MeasureBand(v, width float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) || width <= 0 {
		return ""
	}
	lo := math.Floor(v/width) * width
	return strconv.FormatFloat(lo, 'f', -1, 64) + "-" + strconv.FormatFloat(lo+width, 'f', -1, 64)
}
