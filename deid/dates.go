package deid

import (
	"fmt"
	"strings"
	"time"
)

// parsedDate is a date field's value with the form it was written in.
type parsedDate struct {
	t        time.Time
	dateOnly bool // "YYYY-MM-DD" rather than RFC 3339
	yearOnly bool // "YYYY"
}

// parseDate reads an ISO 8601 calendar date "YYYY-MM-DD", an RFC 3339
// date-time, or a bare year "YYYY".
func parseDate(s string) (parsedDate, error) {
	d, err := parseDate0(strings.TrimSpace(s))
	if err == nil && d.t.Year() < 1 {
		return parsedDate{}, fmt.Errorf("%q: year 0000 is not a calendar year muarc accepts", s)
	}
	return d, err
}

func parseDate0(s string) (parsedDate, error) {
	if len(s) == 4 {
		if t, err := time.Parse("2006", s); err == nil {
			return parsedDate{t: t, yearOnly: true}, nil
		}
	}
	if t, err := time.Parse("2006-01-02", s); err == nil {
		return parsedDate{t: t, dateOnly: true}, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return parsedDate{t: t}, nil
	}
	return parsedDate{}, fmt.Errorf("%q is not a date (want YYYY-MM-DD or RFC 3339, e.g. 2026-03-14T09:30:00Z)", s)
}

// format writes the date back in the form it was read in.
func (d parsedDate) format() string {
	switch {
	case d.yearOnly:
		return d.t.Format("2006")
	case d.dateOnly:
		return d.t.Format("2006-01-02")
	default:
		return d.t.Format(time.RFC3339Nano)
	}
}

// ShiftDate moves an ISO 8601 date or RFC 3339 date-time by days calendar
// days and writes it in the same form; a date-time keeps its clock time and
// offset. A bare year cannot be shifted.
func ShiftDate(s string, days int) (string, error) {
	d, err := parseDate(s)
	if err != nil {
		return "", err
	}
	if d.yearOnly {
		return "", fmt.Errorf("%q is a year only; it cannot be shifted by days", s)
	}
	d.t = d.t.AddDate(0, 0, days)
	if y := d.t.Year(); y < 1 || y > 9999 {
		return "", fmt.Errorf("%q shifted by %d days leaves the years 0001-9999 of ISO 8601 dates", s, days)
	}
	return d.format(), nil
}

// YearOf returns the year of a date ("2026-03-14" -> "2026").
func YearOf(s string) (string, error) {
	d, err := parseDate(s)
	if err != nil {
		return "", err
	}
	return d.t.Format("2006"), nil
}

// AgeAt returns the age in whole years on date at of a person born on birth
// (both ISO 8601 dates or RFC 3339); the birthday counts from its day.
func AgeAt(birth, at string) (int, error) {
	b, err := parseDate(birth)
	if err != nil {
		return 0, err
	}
	a, err := parseDate(at)
	if err != nil {
		return 0, err
	}
	if b.yearOnly || a.yearOnly {
		return 0, fmt.Errorf("an age in whole years needs full dates, not %q and %q", birth, at)
	}
	by, bm, bd := b.t.Date()
	ay, am, ad := a.t.Date()
	age := ay - by
	if am < bm || am == bm && ad < bd {
		age--
	}
	if age < 0 {
		return 0, fmt.Errorf("birth date %s is after %s", birth, at)
	}
	return age, nil
}

var monthNames = []string{"January", "February", "March", "April", "May", "June", "July",
	"August", "September", "October", "November", "December"}

// DateSpellings returns the common ways people and programs write the
// calendar day of s (an ISO 8601 date or RFC 3339 date-time), for the leak
// scan: ISO 8601 basic and extended, day.month.year, month/day/year and
// day/month/year with and without leading zeros, with two- and four-digit
// years, and with English month names in full and abbreviated. A bare year
// has no spellings: a year alone is not an identifier under Safe Harbor
// (45 CFR 164.514(b)(2)(i)(C) excepts the year).
func DateSpellings(s string) []string {
	d, err := parseDate(s)
	if err != nil || d.yearOnly {
		return nil
	}
	y, m, day := d.t.Date()
	Y := fmt.Sprintf("%04d", y)
	yy := fmt.Sprintf("%02d", y%100)
	MM, DD := fmt.Sprintf("%02d", int(m)), fmt.Sprintf("%02d", day)
	M, D := fmt.Sprint(int(m)), fmt.Sprint(day)
	full := monthNames[m-1]
	abbr := full[:3]
	out := []string{
		Y + "-" + MM + "-" + DD, Y + MM + DD, Y + "/" + MM + "/" + DD, Y + "." + MM + "." + DD,
		DD + "." + MM + "." + Y, D + "." + M + "." + Y, DD + "." + MM + "." + yy,
		MM + "/" + DD + "/" + Y, M + "/" + D + "/" + Y, MM + "/" + DD + "/" + yy,
		DD + "/" + MM + "/" + Y, D + "/" + M + "/" + Y, DD + "/" + MM + "/" + yy,
		DD + "-" + MM + "-" + Y, MM + "-" + DD + "-" + Y, DD + MM + Y, MM + DD + Y,
		D + " " + full + " " + Y, DD + " " + full + " " + Y, full + " " + D + ", " + Y, full + " " + D + " " + Y,
		D + " " + abbr + " " + Y, DD + " " + abbr + " " + Y, abbr + " " + D + ", " + Y, abbr + " " + D + " " + Y,
		D + "-" + abbr + "-" + Y, DD + "-" + abbr + "-" + Y, DD + abbr + Y,
	}
	return uniqueStrings(out)
}

func uniqueStrings(in []string) []string {
	seen := map[string]bool{}
	var out []string
	for _, s := range in {
		if s != "" && !seen[s] {
			seen[s] = true
			out = append(out, s)
		}
	}
	return out
}
