// Study metadata merged over the recordings, and contact parsing for bag-info.txt.

package archive

import (
	"fmt"
	"regexp"
	"strings"

	"muarc/archive/bagit"
)

// studyOf merges the study metadata of the recordings: the first non-empty
// value of each field, with a note where recordings disagree.
func studyOf(sums []RecordingSummary) (st studyInfo, notes []string) {
	fields := []struct {
		name string
		get  func(RecordingSummary) string
		dst  *string
	}{
		{"id", func(s RecordingSummary) string { return s.Study.ID }, &st.ID},
		{"title", func(s RecordingSummary) string { return s.Study.Title }, &st.Title},
		{"description", func(s RecordingSummary) string { return s.Study.Description }, &st.Description},
		{"contact", func(s RecordingSummary) string { return s.Study.Contact }, &st.Contact},
	}
	for _, f := range fields {
		from := ""
		for _, s := range sums {
			v := f.get(s)
			if v == "" {
				continue
			}
			if *f.dst == "" {
				*f.dst, from = v, s.File
			} else if v != *f.dst {
				notes = append(notes, fmt.Sprintf("study %s differs between %s and %s; the deposit uses the first", f.name, from, s.File))
				break
			}
		}
	}
	return st, notes
}

type studyInfo struct{ ID, Title, Description, Contact string }

var emailRe = regexp.MustCompile(`[A-Za-z0-9._%+-]+@[A-Za-z0-9.-]+\.[A-Za-z]{2,}`)

// contactFields splits a contact text into Contact-Name and Contact-Email
// (RFC 8493 section 2.2.2 reserved labels).
func contactFields(c string) []bagit.Field {
	c = strings.TrimSpace(c)
	if c == "" {
		return nil
	}
	email := emailRe.FindString(c)
	name := c
	if email != "" {
		name = strings.Replace(name, "<"+email+">", "", 1)
		name = strings.Replace(name, email, "", 1)
	}
	name = strings.TrimSpace(strings.TrimRight(strings.TrimSpace(name), ",;:"))
	name = strings.TrimSpace(strings.TrimSuffix(name, "()"))
	var out []bagit.Field
	if name != "" {
		out = append(out, bagit.Field{Label: "Contact-Name", Value: name})
	}
	if email != "" {
		out = append(out, bagit.Field{Label: "Contact-Email", Value: email})
	}
	return out
}
