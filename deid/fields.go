package deid

import (
	"fmt"
	"sort"
	"strings"
)

// kind is what sort of value a metadata field holds; it decides which
// actions make sense.
type kind int

const (
	kindValue   kind = iota // a number, enum or descriptive text that is not about the person
	kindID                  // an identifier
	kindText                // free text that may identify
	kindDate                // a calendar date or date-time about the person
	kindAge                 // age in years
	kindAgeBand             // an age band
	kindMeasure             // body height or mass
	kindName                // a group name (trial, array, decomposition): must stay present
	kindTime                // a history time stamp: must stay present
	kindSource              // a source file name
	kindExtra               // an extra field (any value type)
	kindData                // a signal or template block
	kindFixed               // always carried (a yes/no without "unknown")
)

var allowed = map[kind][]Action{
	kindValue:   {Keep, Drop},
	kindID:      {Keep, Drop, Pseudonymize},
	kindText:    {Keep, Drop, Scrub},
	kindDate:    {Keep, Drop, Shift, Year},
	kindAge:     {Keep, Drop, Generalize},
	kindAgeBand: {Keep, Drop, Generalize},
	kindMeasure: {Keep, Drop, Generalize},
	kindName:    {Keep, Pseudonymize},
	kindTime:    {Keep, Shift, Year},
	kindSource:  {Drop, Pseudonymize},
	kindExtra:   {Keep, Drop, Pseudonymize, Scrub, Shift, Year},
	kindData:    {Keep, Drop},
	kindFixed:   {Keep},
}

// catalogue lists every named metadata field of the layout (policy form of
// the metadata-view path) and its kind. Extra fields ("<group>.extra.<name>")
// are kindExtra.
var catalogue = map[string]kind{
	"study.id": kindValue, "study.title": kindValue, "study.description": kindValue,
	"study.contact": kindValue, "study.license": kindValue,

	"subject.id": kindID, "subject.name": kindText, "subject.birth_date": kindDate,
	"subject.age_years": kindAge, "subject.age_band": kindAgeBand, "subject.sex": kindValue,
	"subject.height_cm": kindMeasure, "subject.mass_kg": kindMeasure,
	"subject.dominant_side": kindValue, "subject.phone": kindText, "subject.email": kindText,
	"subject.notes": kindText,

	"session.id": kindID, "session.date": kindDate, "session.site": kindText,
	"session.operator": kindText, "session.notes": kindText,

	"trials[].name": kindName, "trials[].task": kindValue, "trials[].target_pct_mvc": kindValue,
	"trials[].mvc": kindValue, "trials[].mvc_unit": kindValue, "trials[].profile_shape": kindValue,
	"trials[].rest_s": kindValue, "trials[].ramp_up_s": kindValue, "trials[].plateau_s": kindValue,
	"trials[].ramp_down_s": kindValue, "trials[].notes": kindText,
	"trials[].force": kindData, "trials[].force_target": kindData,

	"trials[].arrays[].name": kindName, "trials[].arrays[].muscle": kindValue,
	"trials[].arrays[].side": kindValue, "trials[].arrays[].rows": kindValue,
	"trials[].arrays[].columns": kindValue, "trials[].arrays[].ied_mm": kindValue,
	"trials[].arrays[].gain": kindValue, "trials[].arrays[].adc_bits": kindValue,
	"trials[].arrays[].filter_low_hz": kindValue, "trials[].arrays[].filter_high_hz": kindValue,
	"trials[].arrays[].montage": kindValue, "trials[].arrays[].reference": kindValue,
	"trials[].arrays[].unit": kindValue,

	"trials[].arrays[].decompositions[].name":             kindName,
	"trials[].arrays[].decompositions[].method":           kindValue,
	"trials[].arrays[].decompositions[].method_version":   kindValue,
	"trials[].arrays[].decompositions[].parameters":       kindValue,
	"trials[].arrays[].decompositions[].edited_by_hand":   kindFixed,
	"trials[].arrays[].decompositions[].notes":            kindText,
	"trials[].arrays[].decompositions[].muaps":            kindData,
	"trials[].arrays[].decompositions[].derived.computed": kindTime,

	"provenance.sources[].name": kindSource, "provenance.sources[].role": kindValue,
	"provenance.sources[].sha256": kindValue, "provenance.sources[].bytes": kindValue,
	"provenance.history[].action": kindValue, "provenance.history[].software": kindValue,
	"provenance.history[].time": kindTime, "provenance.history[].details": kindValue,
}

// carried lists what is always copied bit-exact and is not a policy field:
// the recorded data themselves.
var carried = []string{
	"trials[].arrays[].sampling_rate_hz", "trials[].arrays[].start_s",
	"trials[].arrays[].sample_type", "trials[].arrays[].samples",
	"trials[].arrays[].channels",
	"trials[].arrays[].decompositions[].units (id and figures)",
	"trials[].arrays[].decompositions[].discharges",
	"trials[].arrays[].decompositions[].derived (figures, method, templates)",
}

// extraGroups are the groups that may carry extra fields, in policy form.
var extraGroups = []string{
	"study", "subject", "session", "trials[]", "trials[].arrays[]",
	"trials[].arrays[].decompositions[].units[]",
}

// kindOf returns the kind of a policy path, or false when the path is not a
// field of the layout.
func kindOf(path string) (kind, bool) {
	if k, ok := catalogue[path]; ok {
		return k, true
	}
	for _, g := range extraGroups {
		rest, ok := strings.CutPrefix(path, g+".extra.")
		if ok && (rest == "*" || rest != "" && !strings.ContainsAny(rest, "[]*")) {
			return kindExtra, true
		}
	}
	return 0, false
}

// checkField reports a path that is not a field or an action not allowed.
func checkField(path string, act Action) error {
	k, ok := kindOf(path)
	if !ok {
		return fmt.Errorf("field %q is not a metadata field of the layout (paths look like \"subject.name\", \"trials[].notes\", \"subject.extra.*\"; the data themselves are always kept)%s", path, suggestPath(path))
	}
	for _, a := range allowed[k] {
		if a == act {
			return nil
		}
	}
	names := make([]string, len(allowed[k]))
	for i, a := range allowed[k] {
		names[i] = string(a)
	}
	return fmt.Errorf("field %q: action %q not possible here (choose %s)", path, act, strings.Join(names, ", "))
}

// suggestPath names the catalogue paths closest to a mistyped one (at most
// two edits away, or with the same last part).
func suggestPath(path string) string {
	last := path
	if i := strings.LastIndex(path, "."); i >= 0 {
		last = path[i+1:]
	}
	var hits []string
	for p := range catalogue {
		if strings.HasSuffix(p, "."+last) || editDistance(p, path) <= 2 {
			hits = append(hits, p)
		}
	}
	sort.Strings(hits)
	if len(hits) == 0 || len(hits) > 6 {
		return ""
	}
	return "; did you mean " + strings.Join(hits, " or ") + "?"
}

// editDistance is the Levenshtein distance of a and b (bytes).
func editDistance(a, b string) int {
	if len(a) > 200 || len(b) > 200 {
		return 1 << 20
	}
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			c := prev[j-1]
			if a[i-1] != b[j-1] {
				c++
			}
			cur[j] = min(c, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// policyPath turns a concrete path ("trials[2].arrays[0].notes") into policy
// form ("trials[].arrays[].notes").
func policyPath(concrete string) string {
	var b strings.Builder
	skip := false
	for _, r := range concrete {
		switch {
		case r == '[':
			skip = true
			b.WriteRune(r)
		case r == ']':
			skip = false
			b.WriteRune(r)
		case !skip:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// PolicyPath turns a concrete metadata-view path with list indices, as
// IdentifyingFields returns, into the policy form: "trials[2].notes" ->
// "trials[].notes".
func PolicyPath(concrete string) string { return policyPath(concrete) }
