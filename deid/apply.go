package deid

import (
	"encoding/json"
	"fmt"
	"math"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"muarc/record"
	"muarc/schema"
)

// Options are the inputs of Apply besides the recording.
type Options struct {
	// Policy is the policy to apply; nil means Default().
	Policy *Policy
	// Pseudonymizer holds the study key.
	Pseudonymizer *Pseudonymizer
	// InputPath is the file the recording was read from, if any: its name and
	// folder become leak-scan needles (file names often carry a name or a
	// date).
	InputPath string
	// Now is the time stamp of the history entry; zero means time.Now().
	Now time.Time
}

// FieldOutcome says what happened to one field holding a value.
type FieldOutcome struct {
	// Path is the concrete metadata-view path, e.g. "trials[1].notes".
	Path string `json:"path"`
	// Action is what was done (Drop for fields the policy does not name).
	Action Action `json:"action"`
	// Named is false when the policy does not name the field (dropped).
	Named bool `json:"named"`
	// Note explains anything beyond the action (a derived age band, a birth
	// year dropped because it implies an age over 89, ...).
	Note string `json:"note,omitempty"`
}

// QuasiIDs are the quasi-identifiers a de-identified recording still holds,
// as written: they feed the k-anonymity report. "" means absent.
type QuasiIDs struct {
	Sex          string `json:"sex,omitempty"`
	AgeBand      string `json:"age_band,omitempty"`
	Height       string `json:"height,omitempty"` // cm, exact or band
	Mass         string `json:"mass,omitempty"`   // kg, exact or band
	DominantSide string `json:"dominant_side,omitempty"`
}

// Result is the outcome of Apply for one recording.
type Result struct {
	// Recording is the de-identified recording. It shares sample sources,
	// signal values and discharge slices with the input (never modified).
	Recording *record.Recording `json:"-"`
	// Subject and Session are the pseudonyms written ("" when dropped).
	Subject string `json:"subject"`
	Session string `json:"session,omitempty"`
	// Fields lists every field that held a value and what was done to it.
	Fields []FieldOutcome `json:"fields"`
	// Unlisted are the concrete paths dropped because the policy does not
	// name them.
	Unlisted []string `json:"unlisted_dropped"`
	// Scrubbed counts removals from free text kept under "scrub".
	Scrubbed []Removal `json:"scrubbed,omitempty"`
	// Notes are remarks a person should read.
	Notes []string `json:"notes,omitempty"`
	// Quasi are the quasi-identifiers kept.
	Quasi QuasiIDs `json:"quasi_identifiers"`
	// Unscannable are needles too short for the byte scan, masked.
	Unscannable []string `json:"unscannable_values,omitempty"`

	// needles are the original identifying values; never printed.
	needles    []string
	originalID string
	origSessID string
}

// Needles returns the original identifying values the output must not
// contain (for ScanBytes). They identify a person: never print them.
func (r *Result) Needles() []string { return append([]string(nil), r.needles...) }

// OriginalSubjectID is the subject id before pseudonymization (for a
// linkage file only).
func (r *Result) OriginalSubjectID() string { return r.originalID }

// OriginalSessionID is the session id before pseudonymization.
func (r *Result) OriginalSessionID() string { return r.origSessID }

type applier struct {
	pol     *Policy
	ps      *Pseudonymizer
	res     *Result
	subj    string // original subject id
	shift   int
	own     []string // the subject's own identifiers, for scrubbing
	removed map[string]int
	needles []string
}

// Apply de-identifies rec under the policy and returns a new recording; rec
// is not modified. It fails when the result would still hold an original
// identifying value in a kept field (say a trial named after the subject) or
// an absolute path; the error names the field and the policy line to change.
func Apply(rec *record.Recording, opt Options) (*Result, error) {
	return apply(rec, opt, true)
}

// apply is Apply; check false skips the output checks (needles only).
func apply(rec *record.Recording, opt Options, check bool) (*Result, error) {
	if opt.Pseudonymizer == nil {
		return nil, fmt.Errorf("deid: no key (make one with `muarc key new FILE`)")
	}
	pol := opt.Policy
	if pol == nil {
		pol = Default()
	}
	now := opt.Now
	if now.IsZero() {
		now = time.Now()
	}
	a := &applier{pol: pol, ps: opt.Pseudonymizer, res: &Result{}, subj: strings.TrimSpace(rec.Subject.ID), removed: map[string]int{}}
	a.res.originalID = a.subj
	a.res.origSessID = rec.Session.ID
	a.shift = a.ps.ShiftDays(a.subj, pol.ShiftMaxDays)
	a.own = ownIdentifiers(rec)
	out := &record.Recording{Software: schema.Software}
	a.study(&rec.Study, &out.Study)
	a.subject(rec, &out.Subject)
	a.session(rec, &out.Session)
	for i := range rec.Trials {
		t, err := a.trial(i, &rec.Trials[i])
		if err != nil {
			return nil, err
		}
		out.Trials = append(out.Trials, t)
	}
	if err := uniqueNames(out); err != nil {
		return nil, err
	}
	a.provenance(rec, out, now)
	a.res.Recording = out
	a.res.Subject = out.Subject.ID
	a.res.Session = out.Session.ID
	a.collectNeedles(rec, opt.InputPath)
	for _, n := range uniqueStrings(a.needles) {
		if len([]rune(n)) < MinNeedleRunes {
			a.res.Unscannable = append(a.res.Unscannable, maskValue(n))
			continue
		}
		a.res.needles = append(a.res.needles, n)
	}
	for _, u := range Unscannable(a.res.needles) {
		a.res.Unscannable = append(a.res.Unscannable, maskValue(u))
	}
	for k, c := range a.removed {
		a.res.Scrubbed = append(a.res.Scrubbed, Removal{k, c})
	}
	sort.Slice(a.res.Scrubbed, func(i, j int) bool { return a.res.Scrubbed[i].Kind < a.res.Scrubbed[j].Kind })
	sort.Strings(a.res.Unlisted)
	if a.res.Unlisted == nil {
		a.res.Unlisted = []string{}
	}
	a.res.Quasi = quasiOf(&out.Subject)
	if !check {
		return a.res, nil
	}
	if err := checkOutput(out, a.res.needles); err != nil {
		return nil, err
	}
	return a.res, nil
}

// ownIdentifiers are the subject's names, ids and contact details, and the
// operator's name, to be removed from any free text kept.
func ownIdentifiers(rec *record.Recording) []string {
	var own []string
	for _, s := range []string{rec.Subject.ID, rec.Subject.Name, rec.Subject.Email, rec.Subject.Phone, rec.Session.ID, rec.Session.Operator} {
		if strings.TrimSpace(s) != "" {
			own = append(own, strings.TrimSpace(s))
		}
	}
	return own
}

// action returns the policy's action for a concrete path and whether the
// policy names the field.
func (a *applier) action(path string) (Action, bool) {
	return a.pol.ActionFor(policyPath(path))
}

// note records what happened to a field.
func (a *applier) note(path string, act Action, named bool, note string) {
	a.res.Fields = append(a.res.Fields, FieldOutcome{path, act, named, note})
	if !named {
		a.res.Unlisted = append(a.res.Unlisted, path)
	}
}

// str handles a string field of the catalogue by its kind.
func (a *applier) str(path, v string, set func(string)) {
	if v == "" {
		return
	}
	act, named := a.action(path)
	k, _ := kindOf(policyPath(path))
	note := ""
	switch act {
	case Keep:
		set(v)
	case Drop:
	case Scrub:
		s, rm := ScrubText(v, a.own)
		for _, r := range rm {
			a.removed[r.Kind] += r.Count
		}
		set(s)
		if len(rm) > 0 {
			note = fmt.Sprintf("%d removal(s)", countRemovals(rm))
		}
	case Pseudonymize:
		switch {
		case path == "subject.id":
			set(a.ps.Subject(v))
		case path == "session.id":
			set(a.ps.Session(a.subj, v))
		case k == kindName:
			set(a.ps.Name(nameDomain(path), a.subj, v))
		default:
			set(a.ps.Extra(policyPath(path), a.subj, v))
		}
	case Shift:
		s, err := ShiftDate(v, a.shift)
		if err != nil {
			act, note = Drop, "dropped: "+err.Error()
		} else {
			set(s)
			note = "shifted by the subject's offset"
		}
	case Year:
		y, err := YearOf(v)
		if err != nil {
			act, note = Drop, "dropped: "+err.Error()
		} else {
			set(y)
		}
	default:
		act, note = Drop, "dropped: action "+string(act)+" does not apply to text"
	}
	// A scrubbed text is kept on purpose: what scrubbing removes is covered
	// by the subject's own needles, not by the text as a whole.
	if act != Keep && act != Scrub && k != kindName && k != kindValue {
		a.needles = append(a.needles, needlesOf(v, k)...)
	}
	a.note(path, act, named, note)
}

func countRemovals(rm []Removal) int {
	n := 0
	for _, r := range rm {
		n += r.Count
	}
	return n
}

func nameDomain(path string) string {
	switch {
	case strings.HasSuffix(path, "].name") && strings.Contains(path, "decompositions["):
		return "decomposition"
	case strings.Contains(path, "arrays["):
		return "array"
	default:
		return "trial"
	}
}

// num handles a number (NaN = absent).
func (a *applier) num(path string, v float64, set func(float64)) {
	keepOrDrop(a, path, v, math.IsNaN(v), set)
}

// integer handles an int (0 = absent).
func (a *applier) integer(path string, v int, set func(int)) {
	keepOrDrop(a, path, v, v == 0, set)
}

// keepOrDrop handles a field the policy may only keep or drop: any other
// action on it drops it.
func keepOrDrop[T any](a *applier, path string, v T, absent bool, set func(T)) {
	if absent {
		return
	}
	act, named := a.action(path)
	if act == Keep {
		set(v)
	} else {
		act = Drop
	}
	a.note(path, act, named, "")
}

// present handles a block of data (a signal, templates): keep or drop.
func (a *applier) present(path string, has bool) bool {
	if !has {
		return false
	}
	act, named := a.action(path)
	a.note(path, act, named, "")
	return act == Keep
}

// extra handles a group's extra fields.
func (a *applier) extra(group string, in record.Extra) record.Extra {
	if len(in) == 0 {
		return nil
	}
	keys := make([]string, 0, len(in))
	for k := range in {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	out := record.Extra{}
	for _, k := range keys {
		v := in[k]
		path := group + ".extra." + k
		act, named := a.action(path)
		note := ""
		s, isStr := v.(string)
		switch act {
		case Keep:
			out[k] = v
		case Drop:
		case Scrub, Pseudonymize, Shift, Year:
			if !isStr {
				act, note = Drop, fmt.Sprintf("dropped: %s needs text, the value is a %T", act, v)
				break
			}
			switch act {
			case Scrub:
				t, rm := ScrubText(s, a.own)
				for _, r := range rm {
					a.removed[r.Kind] += r.Count
				}
				out[k] = t
			case Pseudonymize:
				out[k] = a.ps.Extra(policyPath(path), a.subj, s)
			case Shift:
				t, err := ShiftDate(s, a.shift)
				if err != nil {
					act, note = Drop, "dropped: "+err.Error()
				} else {
					out[k] = t
				}
			case Year:
				t, err := YearOf(s)
				if err != nil {
					act, note = Drop, "dropped: "+err.Error()
				} else {
					out[k] = t
				}
			}
		}
		if act != Keep && act != Scrub {
			a.needles = append(a.needles, extraNeedles(v)...)
		}
		a.note(path, act, named, note)
	}
	if len(out) == 0 {
		return nil
	}
	return out
}

func extraNeedles(v any) []string {
	switch x := v.(type) {
	case string:
		if DateSpellings(x) != nil {
			return DateSpellings(x)
		}
		return []string{strings.TrimSpace(x)}
	case int64:
		if x >= 10000 || x <= -10000 {
			return []string{strconv.FormatInt(x, 10)}
		}
	case float64:
		if x == math.Trunc(x) && math.Abs(x) >= 10000 && math.Abs(x) < 1e15 {
			return []string{strconv.FormatInt(int64(x), 10)}
		}
	}
	return nil
}

// needlesOf returns the spellings of an original value to search for.
func needlesOf(v string, k kind) []string {
	v = strings.TrimSpace(v)
	if v == "" {
		return nil
	}
	if k == kindDate || k == kindTime {
		return DateSpellings(v)
	}
	out := []string{v}
	if d := DateSpellings(v); d != nil {
		out = append(out, d...)
	}
	return out
}

func (a *applier) study(in, out *record.Study) {
	a.str("study.id", in.ID, func(s string) { out.ID = s })
	a.str("study.title", in.Title, func(s string) { out.Title = s })
	a.str("study.description", in.Description, func(s string) { out.Description = s })
	a.str("study.contact", in.Contact, func(s string) { out.Contact = s })
	a.str("study.license", in.License, func(s string) { out.License = s })
	out.Extra = a.extra("study", in.Extra)
}

func (a *applier) subject(rec *record.Recording, out *record.Subject) {
	in := &rec.Subject
	out.AgeYears, out.HeightCm, out.MassKg = math.NaN(), math.NaN(), math.NaN()
	a.str("subject.id", in.ID, func(s string) { out.ID = s })
	a.str("subject.name", in.Name, func(s string) { out.Name = s })
	a.birthDate(rec, out)

	// The recorded band first, then the exact age.
	if in.AgeBand != "" {
		act, named := a.action("subject.age_band")
		note := ""
		switch act {
		case Keep:
			out.AgeBand = in.AgeBand
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
	age := in.AgeYears
	derived := false
	if math.IsNaN(age) && in.BirthDate != "" && rec.Session.Date != "" {
		if n, err := AgeAt(in.BirthDate, rec.Session.Date); err == nil {
			age, derived = float64(n), true
		}
	}
	if act, _ := a.action("subject.age_years"); !math.IsNaN(age) && !(derived && act == Drop) {
		act, named := a.action("subject.age_years")
		note := ""
		if derived {
			// not a recorded field: only its band may be written
			named = true
			if act == Keep {
				act = Generalize
			}
		}
		switch act {
		case Keep:
			out.AgeYears = age
			if age >= 90 {
				note = "age over 89 kept as the policy says; Safe Harbor requires \"90 or older\""
				a.res.Notes = append(a.res.Notes, "subject.age_years: "+note)
			}
		case Generalize:
			b := AgeBand(age, a.pol.AgeBandYears)
			switch {
			case out.AgeBand == "":
				out.AgeBand = b
			case out.AgeBand != b:
				note = fmt.Sprintf("recorded age band %q kept; the exact age would give %q", out.AgeBand, b)
			}
		}
		if derived {
			if act == Generalize {
				note = "age band derived from birth date and session date"
			}
			a.note("subject.age_band", act, true, note)
		} else {
			a.note("subject.age_years", act, named, note)
		}
	}
	a.str("subject.sex", in.Sex, func(s string) { out.Sex = s })
	out.Extra = a.extra("subject", in.Extra)
	a.measure("subject.height_cm", "height_band_cm", in.HeightCm, a.pol.HeightBandCm, &out.HeightCm, out)
	a.measure("subject.mass_kg", "mass_band_kg", in.MassKg, a.pol.MassBandKg, &out.MassKg, out)
	a.str("subject.dominant_side", in.DominantSide, func(s string) { out.DominantSide = s })
	a.str("subject.phone", in.Phone, func(s string) { out.Phone = s })
	if p := strings.TrimSpace(in.Phone); p != "" {
		if d := digitsOnly(p); len(d) >= 7 && d != p {
			a.needles = append(a.needles, d)
		}
	}
	a.str("subject.email", in.Email, func(s string) { out.Email = s })
	a.str("subject.notes", in.Notes, func(s string) { out.Notes = s })
	if act, _ := a.action("subject.name"); act != Keep {
		a.needles = append(a.needles, nameParts(in.Name)...)
	}
}

// measure handles height or mass: keep, drop, or a band written as the
// extra field bandKey ("height_band_cm").
func (a *applier) measure(path, bandKey string, v, width float64, dst *float64, out *record.Subject) {
	if math.IsNaN(v) {
		return
	}
	act, named := a.action(path)
	note := ""
	switch act {
	case Keep:
		*dst = v
	case Generalize:
		if out.Extra == nil {
			out.Extra = record.Extra{}
		}
		out.Extra[bandKey] = MeasureBand(v, width)
		note = "written as subject.extra." + bandKey + " (lo-hi: lo <= value < hi)"
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
				n, _ := strconv.ParseInt(y, 10, 64)
				if out.Extra == nil {
					out.Extra = record.Extra{}
				}
				out.Extra["date_year"] = n
				note = "written as session.extra.date_year (session.date must be a full date)"
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
}

func (a *applier) trial(i int, in *record.Trial) (record.Trial, error) {
	p := fmt.Sprintf("trials[%d]", i)
	out := record.Trial{TargetPctMVC: math.NaN(), MVC: math.NaN(),
		Profile: record.ForceProfile{RestS: math.NaN(), RampUpS: math.NaN(), PlateauS: math.NaN(), RampDownS: math.NaN()}}
	out.Name = in.Name
	a.str(p+".name", in.Name, func(s string) { out.Name = s })
	a.str(p+".task", in.Task, func(s string) { out.Task = s })
	a.num(p+".target_pct_mvc", in.TargetPctMVC, func(v float64) { out.TargetPctMVC = v })
	a.num(p+".mvc", in.MVC, func(v float64) { out.MVC = v })
	a.str(p+".mvc_unit", in.MVCUnit, func(s string) { out.MVCUnit = s })
	a.str(p+".profile_shape", in.Profile.Shape, func(s string) { out.Profile.Shape = s })
	a.num(p+".rest_s", in.Profile.RestS, func(v float64) { out.Profile.RestS = v })
	a.num(p+".ramp_up_s", in.Profile.RampUpS, func(v float64) { out.Profile.RampUpS = v })
	a.num(p+".plateau_s", in.Profile.PlateauS, func(v float64) { out.Profile.PlateauS = v })
	a.num(p+".ramp_down_s", in.Profile.RampDownS, func(v float64) { out.Profile.RampDownS = v })
	a.str(p+".notes", in.Notes, func(s string) { out.Notes = s })
	if a.present(p+".force", in.Force.Present()) {
		out.Force = in.Force
	}
	if a.present(p+".force_target", in.ForceTarget.Present()) {
		out.ForceTarget = in.ForceTarget
	}
	out.Extra = a.extra(p, in.Extra)
	for j := range in.Arrays {
		arr, err := a.array(fmt.Sprintf("%s.arrays[%d]", p, j), &in.Arrays[j])
		if err != nil {
			return out, err
		}
		out.Arrays = append(out.Arrays, arr)
	}
	return out, nil
}

func (a *applier) array(p string, in *record.Array) (record.Array, error) {
	out := record.Array{IEDMm: math.NaN(), Gain: math.NaN(), FilterLowHz: math.NaN(), FilterHighHz: math.NaN()}
	out.Name = in.Name
	a.str(p+".name", in.Name, func(s string) { out.Name = s })
	a.str(p+".muscle", in.Muscle, func(s string) { out.Muscle = s })
	a.str(p+".side", in.Side, func(s string) { out.Side = s })
	a.integer(p+".rows", in.Rows, func(v int) { out.Rows = v })
	a.integer(p+".columns", in.Columns, func(v int) { out.Columns = v })
	a.num(p+".ied_mm", in.IEDMm, func(v float64) { out.IEDMm = v })
	a.num(p+".gain", in.Gain, func(v float64) { out.Gain = v })
	a.integer(p+".adc_bits", in.ADCBits, func(v int) { out.ADCBits = v })
	a.num(p+".filter_low_hz", in.FilterLowHz, func(v float64) { out.FilterLowHz = v })
	a.num(p+".filter_high_hz", in.FilterHighHz, func(v float64) { out.FilterHighHz = v })
	a.str(p+".montage", in.Montage, func(s string) { out.Montage = s })
	a.str(p+".reference", in.Reference, func(s string) { out.Reference = s })
	a.str(p+".unit", in.Unit, func(s string) { out.Unit = s })
	// The recorded data: always carried.
	out.SamplingRateHz, out.StartS, out.SampleType = in.SamplingRateHz, in.StartS, in.SampleType
	out.Samples = in.Samples
	out.Channels = append([]record.Channel(nil), in.Channels...)
	out.Extra = a.extra(p, in.Extra)
	for k := range in.Decompositions {
		out.Decompositions = append(out.Decompositions, a.decomposition(fmt.Sprintf("%s.decompositions[%d]", p, k), &in.Decompositions[k]))
	}
	return out, nil
}

func (a *applier) decomposition(p string, in *record.Decomposition) record.Decomposition {
	out := record.Decomposition{Name: in.Name, Parameters: "{}"}
	a.str(p+".name", in.Name, func(s string) { out.Name = s })
	a.str(p+".method", in.Method, func(s string) { out.Method = s })
	a.str(p+".method_version", in.MethodVersion, func(s string) { out.MethodVersion = s })
	if in.Parameters != "" && in.Parameters != "{}" {
		a.str(p+".parameters", in.Parameters, func(s string) { out.Parameters = s })
	}
	out.EditedByHand = in.EditedByHand // a yes/no with no "unknown": always carried
	a.str(p+".notes", in.Notes, func(s string) { out.Notes = s })
	out.Units = append([]record.Unit(nil), in.Units...)
	if a.present(p+".muaps", in.MUAPs != nil) {
		out.MUAPs = in.MUAPs
	}
	if in.Derived != nil {
		// Derived figures are carried; the time they were computed follows
		// the policy as history times do.
		dv := *in.Derived
		if !dv.Computed.IsZero() {
			act, named := a.action(p + ".derived.computed")
			switch act {
			case Keep:
			case Shift:
				dv.Computed = dv.Computed.AddDate(0, 0, a.shift)
			case Year:
				dv.Computed = time.Date(dv.Computed.Year(), 1, 1, 0, 0, 0, 0, time.UTC)
			default:
				act, dv.Computed = Drop, time.Time{}
			}
			a.note(p+".derived.computed", act, named, "")
		}
		out.Derived = &dv
	}
	for _, c := range in.ExtraColumns {
		path := p + ".units[].extra." + c.Name
		act, named := a.action(path)
		note := ""
		switch act {
		case Keep:
			out.ExtraColumns = append(out.ExtraColumns, c)
		case Drop:
		default:
			if c.Text == nil {
				act, note = Drop, "dropped: "+string(act)+" needs text; the column holds numbers"
				break
			}
			nc := record.Column{Name: c.Name, Unit: c.Unit, Text: make([]string, len(c.Text))}
			ok := true
			for i, s := range c.Text {
				switch act {
				case Scrub:
					t, rm := ScrubText(s, a.own)
					for _, r := range rm {
						a.removed[r.Kind] += r.Count
					}
					nc.Text[i] = t
				case Pseudonymize:
					if s != "" {
						nc.Text[i] = a.ps.Extra(policyPath(path), a.subj, s)
					}
				default:
					ok = false
				}
			}
			if ok {
				out.ExtraColumns = append(out.ExtraColumns, nc)
			} else {
				act, note = Drop, "dropped: "+string(act)+" does not apply to a unit column"
			}
		}
		if act != Keep && act != Scrub {
			for _, s := range c.Text {
				if strings.TrimSpace(s) != "" {
					a.needles = append(a.needles, strings.TrimSpace(s))
				}
			}
		}
		a.note(path, act, named, note)
	}
	return out
}

func (a *applier) provenance(rec *record.Recording, out *record.Recording, now time.Time) {
	seen := map[string]int{}
	for i, s := range rec.Provenance.Sources {
		p := fmt.Sprintf("provenance.sources[%d]", i)
		act, named := a.action(p + ".name")
		a.note(p+".name", act, named, "")
		if s.Name != "" {
			a.needles = append(a.needles, sourceNeedles(s.Name)...)
		}
		if act != Pseudonymize {
			continue
		}
		n := seen[s.Name] // the same name listed more than once gets distinct pseudonyms
		seen[s.Name]++
		o := record.SourceFile{Name: a.ps.sourceN(a.subj, s.Name, n)}
		a.str(p+".role", s.Role, func(v string) { o.Role = v })
		a.str(p+".sha256", s.SHA256, func(v string) { o.SHA256 = v })
		if s.Bytes != 0 {
			ba, bn := a.action(p + ".bytes")
			if ba == Keep {
				o.Bytes = s.Bytes
			} else {
				ba = Drop
			}
			a.note(p+".bytes", ba, bn, "")
		}
		out.Provenance.Sources = append(out.Provenance.Sources, o)
	}
	timeNote := ""
	for i, h := range rec.Provenance.History {
		p := fmt.Sprintf("provenance.history[%d]", i)
		o := record.Operation{Details: "{}"}
		a.str(p+".action", h.Action, func(v string) { o.Action = v })
		a.str(p+".software", h.Software, func(v string) { o.Software = v })
		if !h.Time.IsZero() {
			act, named := a.action(p + ".time")
			switch act {
			case Keep:
				o.Time = h.Time
			case Shift:
				o.Time = h.Time.AddDate(0, 0, a.shift)
				timeNote = "earlier history times shifted by the subject's offset"
			case Year:
				o.Time = time.Date(h.Time.Year(), 1, 1, 0, 0, 0, 0, time.UTC)
				act = Year
				timeNote = "earlier history times reduced to the year (written as 1 January, 00:00 UTC)"
			}
			a.note(p+".time", act, named, "")
		}
		if h.Details != "" && h.Details != "{}" {
			a.str(p+".details", h.Details, func(v string) { o.Details = v })
		}
		out.Provenance.History = append(out.Provenance.History, o)
	}
	details := map[string]any{
		"policy":                  a.pol.Name,
		"policy_sha256":           a.pol.SHA256(),
		"key_fingerprint":         a.ps.Fingerprint(),
		"unlisted_fields_dropped": len(a.res.Unlisted),
	}
	if act, _ := a.pol.ActionFor("session.date"); act == Shift {
		details["dates"] = "shifted per subject by whole days (offset not recorded)"
	}
	if timeNote != "" {
		details["history"] = timeNote
	}
	b, _ := json.Marshal(details)
	out.Provenance.History = append(out.Provenance.History, record.Operation{
		Action: "deidentify", Software: schema.Software, Time: now.UTC().Truncate(time.Second), Details: string(b)})
}

// sourceNeedles are a source file name as listed and its base name. The
// stem alone ("force") is too common a word to search for; names and dates
// inside file names are found through the subject's own needles.
func sourceNeedles(name string) []string {
	name = strings.ReplaceAll(name, "\\", "/")
	out := []string{name}
	base := filepath.Base(name)
	return append(out, base)
}

// collectNeedles adds the input file's absolute path and folder (an output
// must hold no absolute path, least of all its source's).
func (a *applier) collectNeedles(rec *record.Recording, input string) {
	if input == "" {
		return
	}
	if abs, err := filepath.Abs(input); err == nil {
		a.needles = append(a.needles, abs)
		if d := filepath.Dir(abs); strings.Count(d, string(filepath.Separator)) >= 2 {
			a.needles = append(a.needles, d)
		}
	}
}

// nameParts splits a person's name into words of 3 or more letters.
func nameParts(name string) []string {
	var out []string
	for _, w := range strings.FieldsFunc(name, func(r rune) bool { return r == ' ' || r == ',' || r == '-' || r == '.' || r == '\'' }) {
		if len([]rune(w)) >= 3 {
			out = append(out, w)
		}
	}
	return out
}

func digitsOnly(s string) string {
	var b strings.Builder
	for _, c := range s {
		if c >= '0' && c <= '9' {
			b.WriteRune(c)
		}
	}
	return b.String()
}

func quasiOf(s *record.Subject) QuasiIDs {
	q := QuasiIDs{Sex: s.Sex, AgeBand: s.AgeBand, DominantSide: s.DominantSide}
	if !math.IsNaN(s.AgeYears) && q.AgeBand == "" {
		q.AgeBand = strconv.FormatFloat(s.AgeYears, 'f', -1, 64)
	}
	if !math.IsNaN(s.HeightCm) {
		q.Height = strconv.FormatFloat(s.HeightCm, 'f', -1, 64)
	} else if b, ok := s.Extra["height_band_cm"].(string); ok {
		q.Height = b
	}
	if !math.IsNaN(s.MassKg) {
		q.Mass = strconv.FormatFloat(s.MassKg, 'f', -1, 64)
	} else if b, ok := s.Extra["mass_band_kg"].(string); ok {
		q.Mass = b
	}
	return q
}

// uniqueNames checks that pseudonymized group names stay unique.
func uniqueNames(r *record.Recording) error {
	seen := map[string]bool{}
	for _, t := range r.Trials {
		if seen["t/"+t.Name] {
			return fmt.Errorf("two trials would both be named %q", t.Name)
		}
		seen["t/"+t.Name] = true
		for _, a := range t.Arrays {
			k := "a/" + t.Name + "/" + a.Name
			if seen[k] {
				return fmt.Errorf("two arrays of trial %q would both be named %q", t.Name, a.Name)
			}
			seen[k] = true
		}
	}
	return nil
}

// absPath finds absolute file paths in text: "/home/...", "C:\...", "\\host\...".
var absPath = regexp.MustCompile(`(?:^|[\s"'=:(,\[])(?:/[A-Za-z0-9._~\-]+){2,}|\b[A-Za-z]:[\\/][A-Za-z0-9._ \-]+|\\\\[A-Za-z0-9._\-]+\\`)

// checkOutput fails when a kept string still holds an original identifying
// value or an absolute path.
func checkOutput(r *record.Recording, needles []string) error {
	var problems []string
	walkStrings(r, func(path, s string) {
		if s == "" {
			return
		}
		if hits := scanText(s, needles); len(hits) > 0 {
			problems = append(problems, fmt.Sprintf("%s still holds an original identifying value %s (change the policy line %q to drop, scrub or pseudonymize)", path, maskValue(hits[0]), policyPath(path)))
		}
		if absPath.MatchString(s) {
			problems = append(problems, fmt.Sprintf("%s holds an absolute file path (change the policy line %q to drop)", path, policyPath(path)))
		}
	})
	if len(problems) > 0 {
		sort.Strings(problems)
		return fmt.Errorf("de-identified recording not safe to write: %s", strings.Join(problems, "; "))
	}
	return nil
}

// walkStrings calls fn with every string value of a recording's metadata and
// its concrete metadata-view path.
func walkStrings(r *record.Recording, fn func(path, s string)) {
	ex := func(p string, e record.Extra) {
		for k, v := range e {
			if s, ok := v.(string); ok {
				fn(p+".extra."+k, s)
			}
		}
	}
	fn("study.id", r.Study.ID)
	fn("study.title", r.Study.Title)
	fn("study.description", r.Study.Description)
	fn("study.contact", r.Study.Contact)
	fn("study.license", r.Study.License)
	ex("study", r.Study.Extra)
	s := &r.Subject
	for _, kv := range [][2]string{{"id", s.ID}, {"name", s.Name}, {"birth_date", s.BirthDate}, {"age_band", s.AgeBand},
		{"sex", s.Sex}, {"dominant_side", s.DominantSide}, {"phone", s.Phone}, {"email", s.Email}, {"notes", s.Notes}} {
		fn("subject."+kv[0], kv[1])
	}
	ex("subject", s.Extra)
	se := &r.Session
	for _, kv := range [][2]string{{"id", se.ID}, {"date", se.Date}, {"site", se.Site}, {"operator", se.Operator}, {"notes", se.Notes}} {
		fn("session."+kv[0], kv[1])
	}
	ex("session", se.Extra)
	for i, t := range r.Trials {
		p := fmt.Sprintf("trials[%d]", i)
		for _, kv := range [][2]string{{"name", t.Name}, {"task", t.Task}, {"mvc_unit", t.MVCUnit}, {"profile_shape", t.Profile.Shape}, {"notes", t.Notes}} {
			fn(p+"."+kv[0], kv[1])
		}
		fn(p+".force.unit", t.Force.Unit)
		fn(p+".force_target.unit", t.ForceTarget.Unit)
		ex(p, t.Extra)
		for j, ar := range t.Arrays {
			q := fmt.Sprintf("%s.arrays[%d]", p, j)
			for _, kv := range [][2]string{{"name", ar.Name}, {"muscle", ar.Muscle}, {"side", ar.Side}, {"montage", ar.Montage}, {"reference", ar.Reference}, {"unit", ar.Unit}} {
				fn(q+"."+kv[0], kv[1])
			}
			for c, ch := range ar.Channels {
				fn(fmt.Sprintf("%s.channels[%d].label", q, c), ch.Label)
			}
			ex(q, ar.Extra)
			for k, d := range ar.Decompositions {
				dp := fmt.Sprintf("%s.decompositions[%d]", q, k)
				for _, kv := range [][2]string{{"name", d.Name}, {"method", d.Method}, {"method_version", d.MethodVersion}, {"parameters", d.Parameters}, {"notes", d.Notes}} {
					fn(dp+"."+kv[0], kv[1])
				}
				for _, c := range d.ExtraColumns {
					for u, s := range c.Text {
						fn(fmt.Sprintf("%s.units[%d].extra.%s", dp, u, c.Name), s)
					}
				}
				if d.MUAPs != nil {
					fn(dp+".muaps.unit", d.MUAPs.Unit)
				}
				if d.Derived != nil {
					fn(dp+".derived.software", d.Derived.Software)
					fn(dp+".derived.method", d.Derived.Method)
				}
			}
		}
	}
	for i, src := range r.Provenance.Sources {
		p := fmt.Sprintf("provenance.sources[%d]", i)
		fn(p+".name", src.Name)
		fn(p+".role", src.Role)
		fn(p+".sha256", src.SHA256)
	}
	for i, h := range r.Provenance.History {
		p := fmt.Sprintf("provenance.history[%d]", i)
		fn(p+".action", h.Action)
		fn(p+".software", h.Software)
		fn(p+".details", h.Details)
	}
}
