package deid

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"muarc/record"
)

// IdentifyingFields returns the metadata-view paths of rec that still hold
// identifying values under the default policy, with list indices
// ("subject.name", "session.date", "trials[0].notes",
// "provenance.sources[2].name"; PolicyPath gives the policy form). An empty
// result means the recording looks de-identified by the default policy; it
// does not certify anything. A recording that went through Apply (its
// history has a "deidentify" step) is trusted for dates and group names;
// others are judged by their values:
//   - subject.id, session.id: identifying unless in pseudonym form;
//   - name, phone, email, every notes, site and operator: identifying when set;
//   - birth date: identifying unless a year that implies no age over 89;
//   - session.date and history times: identifying unless a deidentify step
//     shifted or reduced them;
//   - age_years of 90 or more, an age band reaching past 89;
//   - extra fields of study, subject, session, trials and arrays the default
//     policy does not keep;
//   - source file names not in pseudonym form, source checksums, history
//     details holding an absolute path.
func IdentifyingFields(rec *record.Recording) []string {
	pol := Default()
	var out []string
	add := func(p string) { out = append(out, p) }
	deidentified := false
	for _, h := range rec.Provenance.History {
		if h.Action == "deidentify" {
			deidentified = true
		}
	}
	s := &rec.Subject
	if s.ID != "" && !IsPseudonym(SubjectPrefix, s.ID) {
		add("subject.id")
	}
	for _, kv := range [][2]string{{"name", s.Name}, {"phone", s.Phone}, {"email", s.Email}, {"notes", s.Notes}} {
		if strings.TrimSpace(kv[1]) != "" {
			add("subject." + kv[0])
		}
	}
	if s.BirthDate != "" {
		d, err := parseDate(s.BirthDate)
		if err != nil || !d.yearOnly {
			add("subject.birth_date")
		} else if over, _ := impliesOver89(rec); over {
			add("subject.birth_date")
		}
	}
	if !math.IsNaN(s.AgeYears) && s.AgeYears >= 90 {
		add("subject.age_years")
	}
	if s.AgeBand != "" {
		if b, ok := NormalizeAgeBand(s.AgeBand); !ok || b != s.AgeBand {
			add("subject.age_band")
		}
	}
	extras := func(group string, e record.Extra) {
		for _, k := range sortedKeys(e) {
			if act, _ := pol.ActionFor(policyPath(group) + ".extra." + k); act != Keep {
				add(group + ".extra." + k)
			}
		}
	}
	extras("study", rec.Study.Extra)
	extras("subject", s.Extra)
	se := &rec.Session
	if se.ID != "" && !IsPseudonym(SessionPrefix, se.ID) {
		add("session.id")
	}
	if se.Date != "" && !deidentified {
		add("session.date")
	}
	for _, kv := range [][2]string{{"site", se.Site}, {"operator", se.Operator}, {"notes", se.Notes}} {
		if strings.TrimSpace(kv[1]) != "" {
			add("session." + kv[0])
		}
	}
	extras("session", se.Extra)
	for i, t := range rec.Trials {
		p := fmt.Sprintf("trials[%d]", i)
		if strings.TrimSpace(t.Notes) != "" {
			add(p + ".notes")
		}
		extras(p, t.Extra)
		for j, a := range t.Arrays {
			q := fmt.Sprintf("%s.arrays[%d]", p, j)
			extras(q, a.Extra)
			for k, d := range a.Decompositions {
				if strings.TrimSpace(d.Notes) != "" {
					add(fmt.Sprintf("%s.decompositions[%d].notes", q, k))
				}
			}
		}
	}
	for i, src := range rec.Provenance.Sources {
		p := fmt.Sprintf("provenance.sources[%d]", i)
		if src.Name != "" && !IsPseudonym(SourcePrefix, strings.TrimSuffix(src.Name, safeExt(src.Name))) {
			add(p + ".name")
		}
		if src.SHA256 != "" {
			add(p + ".sha256")
		}
	}
	for i, h := range rec.Provenance.History {
		p := fmt.Sprintf("provenance.history[%d]", i)
		if !h.Time.IsZero() && !deidentified {
			add(p + ".time")
		}
		if absPath.MatchString(h.Details) {
			add(p + ".details")
		}
	}
	return out
}

func sortedKeys(e record.Extra) []string {
	keys := make([]string, 0, len(e))
	for k := range e {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	return keys
}
