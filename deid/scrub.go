package deid

import (
	"net"
	"regexp"
	"sort"
	"strings"
	"unicode"
	"unicode/utf8"
)

// Removal counts what ScrubText took out of a text, by kind. The removed text is
// never kept, so a report of removals cannot leak it.
type Removal struct {
	// Kind is "name", "id", "email", "url", "ip", "date", "phone", "address"
	// or "number".
	Kind  string `json:"kind"`
	Count int    `json:"count"`
}

const monthRE = `(?:January|February|March|April|May|June|July|August|September|October|November|December|Jan|Feb|Mar|Apr|Jun|Jul|Aug|Sept|Sep|Oct|Nov|Dec)`

// scrubRules run in order; each replaces its matches by "[kind]". The kinds
// follow the Safe Harbor list (45 CFR 164.514(b)(2)(i)): (A) names, (B)
// street addresses and ZIP codes, (C) dates, (D)-(E) telephone and fax
// numbers, (F) e-mail addresses, (G)-(M) numbers and codes (social security,
// medical record, health plan, account, certificate and licence numbers,
// vehicle and device identifiers and serial numbers), (N) URLs and (O) IP
// addresses. Names of people other than the subject cannot be found by
// pattern except after a title ("Dr. X").
var scrubRules = []struct {
	kind string
	re   *regexp.Regexp
}{
	{"email", regexp.MustCompile(`[A-Za-z0-9._%+\-]+@[A-Za-z0-9\-]+(?:\.[A-Za-z0-9\-]+)*\.[A-Za-z]{2,}`)},
	{"url", regexp.MustCompile(`(?i)\b(?:https?|ftp|file)://[^\s<>"']+|\bwww\.[^\s<>"']+`)},
	{"ip", regexp.MustCompile(`\b(?:(?:25[0-5]|2[0-4][0-9]|1[0-9][0-9]|[1-9]?[0-9])\.){3}(?:25[0-5]|2[0-4][0-9]|1[0-9][0-9]|[1-9]?[0-9])\b`)},
	{"date", regexp.MustCompile(`(?i)\b[0-9]{1,2}(?:st|nd|rd|th)?[ \-]+(?:of )?` + monthRE + `\.?,?(?:[ \-]+[0-9]{2,4})?\b`)},
	{"date", regexp.MustCompile(`(?i)\b` + monthRE + `\.?[ \-]+[0-9]{1,2}(?:st|nd|rd|th)?\b(?:,? +[0-9]{2,4}\b)?`)},
	{"date", regexp.MustCompile(`(?i)\b` + monthRE + `\.?,? +[0-9]{4}\b`)},
	{"date", regexp.MustCompile(`\b[0-9]{4}[./\-][0-9]{1,2}[./\-][0-9]{1,2}(?:[T ][0-9:.]+(?:Z|[+\-][0-9:]+)?)?\b|\b[0-9]{1,2}[./\-][0-9]{1,2}[./\-][0-9]{2,4}\b`)},
	{"phone", regexp.MustCompile(`(?:\+|\b00)?\(?[0-9][0-9 ().\-/]{5,}[0-9]\b`)},
	{"address", regexp.MustCompile(`\b[0-9]{1,5}[a-zA-Z]? +(?:[A-Z][a-z]+ +){1,3}(?:Street|St|Road|Rd|Avenue|Ave|Lane|Ln|Way|Drive|Boulevard|Blvd|Court|Ct|Place|Pl|Square|Sq)\b\.?`)},
	{"name", regexp.MustCompile(`\b(?:Mr|Mrs|Ms|Miss|Mx|Dr|Prof|Herr|Frau)\.? +[\p{Lu}][\p{L}'\-]+`)},
	{"number", regexp.MustCompile(`\b[0-9]{5,}\b`)},
}

// codeToken finds tokens that look like codes: letters and at least three
// digits mixed (serial, licence, record numbers: "SN-44721X", "MRN0042").
var codeToken = regexp.MustCompile(`[\p{L}\p{N}][\p{L}\p{N}_\-/#]{3,}`)

// ScrubText removes from free text the subject's own identifiers (own: names,
// ids and the like, each also split into its words of two or more letters;
// matched case-insensitively as whole words), then e-mail addresses, URLs,
// IP addresses (v4 and v6), dates (numeric and with English month names),
// phone numbers (7 or more digits), street addresses, titled names, numbers
// of five or more digits and letter-digit codes with three or more digits.
// Each removal is replaced by "[kind]". Scrubbing is a pattern search: it
// reduces, it does not remove, the chance that a text identifies someone.
func ScrubText(text string, own []string) (string, []Removal) {
	if !utf8.ValidString(text) {
		text = strings.ToValidUTF8(text, "\uFFFD")
	}
	counts := map[string]int{}
	// Own identifiers first, longest first, so a full name goes before its parts.
	for _, n := range ownTerms(own) {
		text = replaceWord(text, n.term, "["+n.kind+"]", counts, n.kind)
	}
	for _, r := range scrubRules {
		text = r.re.ReplaceAllStringFunc(text, func(m string) string {
			if r.kind == "phone" && countDigits(m) < 7 {
				return m
			}
			counts[r.kind]++
			return "[" + r.kind + "]"
		})
	}
	text = replaceIPv6(text, counts)
	text = codeToken.ReplaceAllStringFunc(text, func(m string) string {
		if m == "[number]" || strings.HasPrefix(m, "[") {
			return m
		}
		digits, letters := 0, 0
		for _, c := range m {
			switch {
			case unicode.IsDigit(c):
				digits++
			case unicode.IsLetter(c):
				letters++
			}
		}
		if digits >= 3 && letters >= 1 {
			counts["id"]++
			return "[id]"
		}
		return m
	})
	var out []Removal
	for k, c := range counts {
		out = append(out, Removal{k, c})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Kind < out[j].Kind })
	return text, out
}

type ownTerm struct{ term, kind string }

// ownTerms expands the subject's identifiers into whole values and their
// words (names split on spaces, hyphens, commas and dots), longest first.
func ownTerms(own []string) []ownTerm {
	seen := map[string]bool{}
	var out []ownTerm
	add := func(t, kind string) {
		t = strings.TrimSpace(t)
		key := strings.ToLower(t)
		if utf8.RuneCountInString(t) < 2 || seen[key] {
			return
		}
		seen[key] = true
		out = append(out, ownTerm{t, kind})
	}
	for _, o := range own {
		kind := "id"
		if hasLetters(o) && countDigits(o) == 0 {
			kind = "name"
		}
		add(o, kind)
		if kind == "name" {
			for _, w := range strings.FieldsFunc(o, func(r rune) bool {
				return unicode.IsSpace(r) || r == '-' || r == ',' || r == '.' || r == '\''
			}) {
				add(w, "name")
			}
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return len(out[i].term) > len(out[j].term) })
	return out
}

// replaceWord replaces every whole-word, case-insensitive occurrence of term.
// A word boundary is any rune that is not a letter or digit (Unicode), so
// names with accented first letters are found too.
func replaceWord(text, term, repl string, counts map[string]int, kind string) string {
	re, err := regexp.Compile(`(?i)(^|[^\p{L}\p{N}])` + regexp.QuoteMeta(term) + `($|[^\p{L}\p{N}])`)
	if err != nil {
		return text
	}
	for i := 0; i < 4; i++ { // adjacent matches share a boundary rune; repeat
		n := 0
		text = re.ReplaceAllStringFunc(text, func(m string) string {
			sm := re.FindStringSubmatch(m)
			n++
			return sm[1] + repl + sm[2]
		})
		if n == 0 {
			break
		}
		counts[kind] += n
	}
	return text
}

var ipv6Candidate = regexp.MustCompile(`[0-9A-Fa-f:]*:[0-9A-Fa-f:]*:[0-9A-Fa-f:.]*`)

func replaceIPv6(text string, counts map[string]int) string {
	return ipv6Candidate.ReplaceAllStringFunc(text, func(m string) string {
		t := strings.Trim(m, ".")
		if strings.Count(t, ":") >= 2 && net.ParseIP(t) != nil && strings.Contains(t, ":") {
			counts["ip"]++
			return "[ip]" + m[len(strings.TrimRight(m, ".")):]
		}
		return m
	})
}

func countDigits(s string) int {
	n := 0
	for _, c := range s {
		if c >= '0' && c <= '9' {
			n++
		}
	}
	return n
}

func hasLetters(s string) bool {
	for _, c := range s {
		if unicode.IsLetter(c) {
			return true
		}
	}
	return false
}
