package deid

import (
	"fmt"
	"math"
	"reflect"
	"sort"
	"strconv"
	"strings"
	"sync"
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
	// AcceptedDamage counts, by validation check id, the integrity
	// findings of a damaged source de-identified on request
	// (StudyOptions.AcceptDamaged); the history entry records them.
	AcceptedDamage map[string]int

	// people are the other subjects of the study run (others.go).
	people *studyPeople
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
	// InStudy counts words of free text and places not searched because
	// the study's own kept metadata holds them (the institute's name).
	InStudy int `json:"words_also_in_study_metadata,omitempty"`
	// Unscannable are needles too short for the byte scan, masked.
	Unscannable []string `json:"unscannable_values,omitempty"`

	// needles are the original identifying values; never printed.
	needles []string
	// words are the parts of names that are ordinary words, judged in
	// the values only (namewords.go).
	words      *wordCheck
	people     *studyPeople
	phones     []string
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
	damage  map[string]int
	pol     *Policy
	ps      *Pseudonymizer
	res     *Result
	subj    string // original subject id
	shift   int
	own     []string // the subject's own identifiers, for scrubbing
	removed map[string]int
	needles []string
	words   *wordCheck
	phones  []string // the last 7 digits of phone numbers taken out
	// text are needles from free text, places, extras, columns and labels:
	// not searched where the study's own kept metadata holds them.
	text []string
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
	a := &applier{damage: opt.AcceptedDamage, pol: pol, ps: opt.Pseudonymizer, res: &Result{}, subj: strings.TrimSpace(rec.Subject.ID), removed: map[string]int{}, words: newWordCheck()}
	a.res.originalID = a.subj
	a.res.origSessID = rec.Session.ID
	a.shift = a.ps.ShiftDays(a.subj, pol.ShiftMaxDays)
	a.own = ownIdentifiers(rec)
	out := &record.Recording{Software: schema.Software, Created: now.UTC().Truncate(time.Second)}
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
	a.needles = append(a.needles, a.studyFree(out)...)
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
	a.res.words, a.res.people, a.res.phones = a.words, opt.people, a.phones
	if !check {
		return a.res, nil
	}
	notes, err := checkOutput(out, a.res.needles, a.words, append(checkOthers(out, opt.people, a.subj), checkPhones(out, a.phones)...))
	if err != nil {
		return nil, err
	}
	a.res.Notes = append(a.res.Notes, notes...)
	return a.res, nil
}

// studyFree returns the text needles that the study's own kept metadata
// does not hold. The study's title, description and contact are about the
// study, published on purpose: a word of the session's site that names the
// institute the study's contact names too is not a leak. The subject's
// own identifiers (name, ids, contact details, dates) are searched there
// as everywhere.
func (a *applier) studyFree(out *record.Recording) []string {
	var study []string
	walkValue(reflect.ValueOf(out.Study), "study", func(_, s string) { study = append(study, s) })
	text := strings.Join(study, "\n")
	var keep []string
	for _, n := range uniqueStrings(a.text) {
		if len(scanText(text, []string{n})) > 0 {
			a.res.InStudy++
			continue
		}
		keep = append(keep, n)
	}
	return keep
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
	path = internPath(path)
	a.res.Fields = append(a.res.Fields, FieldOutcome{path, act, named, note})
	if !named {
		a.res.Unlisted = append(a.res.Unlisted, path)
	}
}

// str handles a string field of the registry by its class.
func (a *applier) str(path, v string, set func(string)) {
	if v == "" {
		return
	}
	act, named := a.action(path)
	k, _ := classOf(policyPath(path))
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
		case k == schema.ClassName:
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
	switch {
	case act == Keep || act == Scrub || k == schema.ClassName || k == schema.ClassValue:
	case path == "subject.name":
		a.needles = append(a.needles, nameNeedles(v)...)
		a.words.add(v)
	case path == "session.operator":
		a.text = append(a.text, nameNeedles(v)...)
		a.words.add(v)
	case k == schema.ClassText && path != "subject.phone" && path != "subject.email":
		a.text = append(a.text, needlesOf(v, k)...)
	default:
		a.needles = append(a.needles, needlesOf(v, k)...)
	}
	a.note(path, act, named, note)
}

// paths holds one copy of each field path reported: a study's
// recordings share their paths, and a run keeps every file's report rows
// to the end, so each row then costs its slot, not its own copy of the
// text. The number of distinct paths is set by the recordings' shapes
// (trials, arrays, decompositions, extra fields), not by the number of
// files.
var paths struct {
	sync.Mutex
	m map[string]string
}

func internPath(p string) string {
	paths.Lock()
	defer paths.Unlock()
	if q, ok := paths.m[p]; ok {
		return q
	}
	if paths.m == nil || len(paths.m) > 1<<16 {
		paths.m = map[string]string{} // a bound for odd inputs; rows stay correct
	}
	paths.m[p] = p
	return p
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
			a.text = append(a.text, extraNeedles(v)...)
		}
		a.note(path, act, named, note)
	}
	if len(out) == 0 {
		return nil
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

func quasiOf(s *record.Subject) QuasiIDs {
	q := QuasiIDs{Sex: s.Sex, AgeBand: s.AgeBand, DominantSide: s.DominantSide}
	if !math.IsNaN(s.AgeYears) && q.AgeBand == "" {
		q.AgeBand = strconv.FormatFloat(s.AgeYears, 'f', -1, 64)
	}
	if !math.IsNaN(s.HeightCm) {
		q.Height = strconv.FormatFloat(s.HeightCm, 'f', -1, 64)
	} else {
		q.Height = s.HeightBandCm
	}
	if !math.IsNaN(s.MassKg) {
		q.Mass = strconv.FormatFloat(s.MassKg, 'f', -1, 64)
	} else {
		q.Mass = s.MassBandKg
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
