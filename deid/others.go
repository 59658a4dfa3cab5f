package deid

import (
	"fmt"
	"strings"

	"muarc/record"
)

// A kept value of one subject's file can name another subject of the same
// study ("same protocol as Hallbeck" in a task, a study description that
// names the first participant in every file). Each file's own needles do
// not cover that, so a study run also looks, in the values of each output,
// for the names and e-mail addresses of the study's other subjects. It
// looks token by token in a set (the cost does not grow with the number
// of subjects), not in the raw bytes: another subject's name can only
// enter an output through a value.

// studyPeople indexes the names and e-mail addresses of a study's
// subjects: lower-case token -> the subject ids it belongs to.
type studyPeople struct {
	tokens map[string]map[string]bool
}

func newStudyPeople() *studyPeople {
	return &studyPeople{tokens: map[string]map[string]bool{}}
}

// add indexes subject subj's name and e-mail address: each part of the
// name of four letters or more that is not an ordinary word, and the
// address as a whole.
func (sp *studyPeople) add(subj, name, email string) {
	put := func(tok string) {
		if sp.tokens[tok] == nil {
			sp.tokens[tok] = map[string]bool{}
		}
		sp.tokens[tok][subj] = true
	}
	for _, w := range wordNeedles(name, 4) {
		put(strings.ToLower(w))
	}
	if e := strings.ToLower(strings.TrimSpace(email)); strings.Contains(e, "@") {
		put(e)
	}
}

// other reports whether value holds a name part or e-mail address of a
// subject other than self.
func (sp *studyPeople) other(value, self string) bool {
	if sp == nil || len(sp.tokens) == 0 {
		return false
	}
	foreign := func(tok string) bool {
		for s := range sp.tokens[strings.ToLower(tok)] {
			if s != self {
				return true
			}
		}
		return false
	}
	for _, w := range strings.Fields(value) {
		if strings.Contains(w, "@") && foreign(strings.Trim(w, `.,;:()<>[]"'`)) {
			return true
		}
		for _, t := range valueTokens(w) {
			if !t.digit && foreign(t.s) {
				return true
			}
		}
	}
	return false
}

// checkOthers returns a finding for every value of r that names another
// subject of the study.
func checkOthers(r *record.Recording, sp *studyPeople, self string) []Finding {
	if sp == nil {
		return nil
	}
	var out []Finding
	walkStrings(r, func(path, s string) {
		if s != "" && sp.other(s, self) {
			out = append(out, finding(r, path, s, fmt.Sprintf("holds the name or e-mail address of another subject of the study (%d characters)", len([]rune(s)))))
		}
	})
	return out
}

// checkPhones returns a finding for every value of r whose digits, with
// everything else left out, hold the last seven digits of a phone number
// taken out: the number written another way ("555 0120", "(555) 01-20").
func checkPhones(r *record.Recording, phones []string) []Finding {
	if len(phones) == 0 {
		return nil
	}
	var out []Finding
	walkStrings(r, func(path, s string) {
		d := digitsOnly(s)
		for _, p := range phones {
			if len(d) >= len(p) && strings.Contains(d, p) {
				out = append(out, finding(r, path, s, "holds the subject's phone number, written another way"))
				return
			}
		}
	})
	return out
}
