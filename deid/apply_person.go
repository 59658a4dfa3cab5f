package deid

import (
	"fmt"
	"math"
	"muarc/record"
	"strconv"
	"strings"
	"time"
)

func (a *applier) subject(rec *record.Recording, out *record.Subject) {
	in := &rec.Subject
	out.AgeYears, out.HeightCm, out.MassKg = math.NaN(), math.NaN(), math.NaN()
	a.str("subject.id", in.ID, func(s string) { out.ID = s })
	a.str("subject.name", in.Name, func(s string) { out.Name = s })
	a.birthDate(rec, out)

	a.age(rec, out)
	a.str("subject.sex", in.Sex, func(s string) { out.Sex = s })
	out.Extra = a.extra("subject", in.Extra)
	a.str("subject.height_band_cm", in.HeightBandCm, func(s string) { out.HeightBandCm = s })
	a.str("subject.mass_band_kg", in.MassBandKg, func(s string) { out.MassBandKg = s })
	a.measure("subject.height_cm", "height_band_cm", in.HeightCm, a.pol.HeightBandCm, &out.HeightCm, &out.HeightBandCm)
	a.measure("subject.mass_kg", "mass_band_kg", in.MassKg, a.pol.MassBandKg, &out.MassKg, &out.MassBandKg)
	a.str("subject.dominant_side", in.DominantSide, func(s string) { out.DominantSide = s })
	a.str("subject.phone", in.Phone, func(s string) { out.Phone = s })
	if p := strings.TrimSpace(in.Phone); p != "" {
		if d := digitsOnly(p); len(d) >= 7 {
			if d != p {
				a.needles = append(a.needles, d)
			}
			a.phones = append(a.phones, d[len(d)-7:])
		}
	}
	a.str("subject.email", in.Email, func(s string) { out.Email = s })
	a.str("subject.notes", in.Notes, func(s string) { out.Notes = s })
}

// AgeAtSession is the subject's age at the session in years as Safe Harbor
// needs it: the recorded age_years, or the whole years from birth date to
// session date when both are full dates, whichever is higher (45 CFR
// 164.514(b)(2)(i)(C) puts every age over 89 in one category; where two
// readings differ, the higher one decides that). fromDates is true when the
// dates gave the value returned. NaN when neither is known.
func AgeAtSession(rec *record.Recording) (age float64, fromDates bool) {
	age = rec.Subject.AgeYears
	if rec.Subject.BirthDate == "" || rec.Session.Date == "" {
		return age, false
	}
	n, err := AgeAt(rec.Subject.BirthDate, rec.Session.Date)
	if err != nil || !math.IsNaN(age) && math.Floor(age) >= float64(n) {
		return age, false
	}
	return float64(n), true
}

// age applies the policy to age_band and age_years. A recorded band is read
// first; the age (AgeAtSession) then gives the band when the policy
// generalizes, and an age over 89 always gives "90 or older".
func (a *applier) age(rec *record.Recording, out *record.Subject) {
	in := &rec.Subject
	age, fromDates := AgeAtSession(rec)
	over89 := !math.IsNaN(age) && age >= 90
	if in.AgeBand != "" {
		act, named := a.action("subject.age_band")
		note := ""
		switch act {
		case Keep:
			out.AgeBand = in.AgeBand
			if over89 && in.AgeBand != OldestBand {
				note = "age over 89 at the session, band kept as the policy says; Safe Harbor requires \"90 or older\""
				a.res.Notes = append(a.res.Notes, "subject.age_band: "+note)
			}
		case Generalize:
			if b, ok := NormalizeAgeBand(in.AgeBand); ok {
				out.AgeBand = b
				if b != in.AgeBand {
					note = "band reaching past 89 widened (45 CFR 164.514(b)(2)(i)(C))"
				}
			} else {
				act, note = Drop, "dropped: not an age band muarc can read (want \"30-39\" or \"90 or older\")"
			}
		}
		a.note("subject.age_band", act, named, note)
	}
	if math.IsNaN(age) {
		return
	}
	act, named := a.action("subject.age_years")
	recorded := !math.IsNaN(in.AgeYears)
	if !recorded {
		if act == Drop {
			return
		}
		// not a recorded field: only its band may be written
		act, named = Generalize, true
	}
	note := ""
	switch act {
	case Keep:
		out.AgeYears = in.AgeYears
		if over89 {
			note = "age over 89 at the session kept as the policy says; Safe Harbor requires \"90 or older\""
			a.res.Notes = append(a.res.Notes, "subject.age_years: "+note)
		}
	case Generalize:
		b := AgeBand(age, a.pol.AgeBandYears)
		switch {
		case out.AgeBand == "" || b == OldestBand && out.AgeBand != b:
			out.AgeBand = b
		case out.AgeBand != b:
			note = fmt.Sprintf("recorded age band %q kept; the age would give %q", out.AgeBand, b)
		}
		if fromDates {
			note = strings.TrimPrefix(note+"; age from birth date and session date (higher than any recorded age)", "; ")
		}
	}
	if !recorded {
		a.note("subject.age_band", act, true, note)
		return
	}
	a.note("subject.age_years", act, named, note)
}

// measure handles height or mass: keep, drop, or a band written to band,
// the registry field bandKey ("height_band_cm").
func (a *applier) measure(path, bandKey string, v, width float64, dst *float64, band *string) {
	if math.IsNaN(v) {
		return
	}
	act, named := a.action(path)
	note := ""
	switch act {
	case Keep:
		*dst = v
	case Generalize:
		*band = MeasureBand(v, width)
		note = "written as subject." + bandKey + " (lo-hi: lo <= value < hi)"
	}
	a.note(path, act, named, note)
}

// birthDate applies the policy to the birth date; a year that implies an age
// over 89 is dropped (45 CFR 164.514(b)(2)(i)(C) covers "all elements of
// dates (including year) indicative of such age").
func (a *applier) birthDate(rec *record.Recording, out *record.Subject) {
	in := rec.Subject.BirthDate
	if in == "" {
		return
	}
	act, named := a.action("subject.birth_date")
	note := ""
	switch act {
	case Keep:
		out.BirthDate = in
	case Shift, Year:
		var v string
		var err error
		if act == Shift {
			v, err = ShiftDate(in, a.shift)
		} else {
			v, err = YearOf(in)
		}
		if err != nil {
			act, note = Drop, "dropped: "+err.Error()
			break
		}
		if over, why := impliesOver89(rec); over {
			act, note = Drop, "dropped: "+why
			break
		}
		out.BirthDate = v
	}
	if act != Keep {
		a.needles = append(a.needles, DateSpellings(in)...)
	}
	a.note("subject.birth_date", act, named, note)
}

// impliesOver89 reports whether the subject may be over 89 at the session,
// judged conservatively from the recorded age, the birth year and the
// session year (or, without a session date, the current year).
func impliesOver89(rec *record.Recording) (bool, string) {
	if !math.IsNaN(rec.Subject.AgeYears) && rec.Subject.AgeYears >= 90 {
		return true, "the subject's age is over 89"
	}
	if lo, _, ok := parseBand(rec.Subject.AgeBand); ok && rec.Subject.AgeBand != "" && lo >= 90 {
		return true, "the subject's age band is over 89"
	}
	by, err := YearOf(rec.Subject.BirthDate)
	if err != nil {
		return false, ""
	}
	ref := time.Now().UTC().Format("2006")
	if rec.Session.Date != "" {
		if y, err := YearOf(rec.Session.Date); err == nil {
			ref = y
		}
	}
	b, _ := strconv.Atoi(by)
	r, _ := strconv.Atoi(ref)
	if r-b >= 90 {
		return true, fmt.Sprintf("born %d years before the session year, the subject may be over 89", r-b)
	}
	return false, ""
}

func (a *applier) session(rec *record.Recording, out *record.Session) {
	in := &rec.Session
	a.str("session.id", in.ID, func(s string) { out.ID = s })
	out.Extra = a.extra("session", in.Extra)
	a.integer("session.date_year", in.DateYear, func(v int) { out.DateYear = v })
	if in.Date != "" {
		act, named := a.action("session.date")
		note := ""
		switch act {
		case Keep:
			out.Date = in.Date
		case Shift:
			if s, err := ShiftDate(in.Date, a.shift); err != nil {
				act, note = Drop, "dropped: "+err.Error()
			} else {
				out.Date = s
				note = "shifted by the subject's offset (whole days; intervals between this subject's sessions kept)"
			}
		case Year:
			if y, err := YearOf(in.Date); err != nil {
				act, note = Drop, "dropped: "+err.Error()
			} else {
				out.DateYear, _ = strconv.Atoi(y)
				note = "written as session.date_year (session.date must be a full date)"
			}
		}
		if act != Keep {
			a.needles = append(a.needles, DateSpellings(in.Date)...)
		}
		a.note("session.date", act, named, note)
	}
	a.str("session.site", in.Site, func(s string) { out.Site = s })
	a.str("session.operator", in.Operator, func(s string) { out.Operator = s })
	a.str("session.notes", in.Notes, func(s string) { out.Notes = s })
	if in.PowerLineHz > 0 {
		a.num("session.power_line_hz", in.PowerLineHz, func(v float64) { out.PowerLineHz = v })
	}
}
