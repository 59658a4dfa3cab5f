package deid

import (
	"fmt"
	"os"
	"regexp"
	"sort"
	"strings"

	"muarc/recfile"
)

// CheckOptions control CheckFile.
type CheckOptions struct {
	// Original is the file the checked one was made from, if at hand: its
	// identifying values (under Policy) are searched for in the raw bytes.
	Original string
	// Policy decides which of the original's values count as identifying
	// (those it does not keep); nil means Default().
	Policy *Policy
	// Needles are more values to search for (a name, a date, a code).
	Needles []string
}

// CheckReport is the result of CheckFile. Values are masked.
type CheckReport struct {
	File string `json:"file"`
	// StillIdentifying are the paths IdentifyingFields reports.
	StillIdentifying []string `json:"still_identifying"`
	// Patterns are e-mail addresses, URLs, IP addresses, phone numbers and
	// absolute paths found in the decoded metadata, by path.
	Patterns []string `json:"patterns"`
	// Leaks are original values found in the raw bytes or decoded metadata.
	Leaks []string `json:"leaks"`
	// Findings are the strings holding one of the values, by path, with
	// the policy line that would take each out.
	Findings []Finding `json:"findings"`
	// ValuesOnly are values and name parts that are ordinary words,
	// searched in the values of the file only (masked).
	ValuesOnly []string `json:"searched_in_values_only,omitempty"`
	// Notes name the values that hold one of those words as a word
	// (not a finding: read them before sharing).
	Notes []string `json:"notes,omitempty"`
	// Searched is the number of original values searched for.
	Searched    int      `json:"values_searched"`
	Unscannable []string `json:"too_short_for_byte_scan,omitempty"`
	Bytes       int64    `json:"bytes_scanned"`
	Caution     string   `json:"caution"`
}

// OK reports whether the check found nothing.
func (r *CheckReport) OK() bool {
	return len(r.StillIdentifying) == 0 && len(r.Patterns) == 0 && len(r.Leaks) == 0 && len(r.Findings) == 0
}

var checkPatterns = []struct {
	kind string
	re   *regexp.Regexp
}{
	{"e-mail address", scrubRules[0].re},
	{"URL", scrubRules[1].re},
	{"IP address", scrubRules[2].re},
	{"absolute path", absPath},
}

// CheckFile checks a file meant for sharing: IdentifyingFields on its
// metadata, patterns of identifiers (e-mail, URL, IP address, absolute path)
// in its decoded metadata, and, when the original or values are given, a
// scan of its raw bytes and decoded metadata for them (UTF-8, UTF-16LE/BE,
// dates in their common spellings).
func CheckFile(path string, opt CheckOptions) (*CheckReport, error) {
	rep := &CheckReport{File: path, StillIdentifying: []string{}, Patterns: []string{}, Leaks: []string{}, Findings: []Finding{}, Caution: Caution}
	f, err := recfile.Open(path)
	if err != nil {
		return nil, err
	}
	rep.StillIdentifying = IdentifyingFields(f.Recording())
	walkStrings(f.Recording(), func(p, s string) {
		for _, c := range checkPatterns {
			if strings.HasPrefix(p, "study.") && c.kind != "absolute path" {
				continue // the study's own contact and description are not about a subject
			}
			if c.re.MatchString(s) {
				rep.Patterns = append(rep.Patterns, fmt.Sprintf("%s: %s", p, c.kind))
			}
		}
	})
	f.Close()
	sort.Strings(rep.Patterns)
	if fi, err := os.Stat(path); err == nil {
		rep.Bytes = fi.Size()
	}
	var needles []string
	wc := newWordCheck()
	for _, n := range opt.Needles {
		if strings.TrimSpace(n) != "" {
			needles = append(needles, strings.TrimSpace(n))
			needles = append(needles, DateSpellings(n)...)
		}
	}
	if opt.Original != "" {
		o, err := recfile.Open(opt.Original)
		if err != nil {
			return nil, fmt.Errorf("original: %w", err)
		}
		// The needles do not depend on the key: any key will do.
		k, _ := KeyFromBytes(make([]byte, KeyBytes))
		res, err := collectOnly(o, opt.Policy, k)
		o.Close()
		if err != nil {
			return nil, err
		}
		needles = append(needles, res.Needles()...)
		if res.words != nil {
			wc = res.words
		}
	}
	needles = uniqueStrings(needles)
	// A needle that is one ordinary word ("Hand") is judged in the values
	// only, as a name part is (namewords.go): the raw bytes hold the
	// layout's own names (edited_by_hand) by design.
	var raw []string
	for _, n := range needles {
		for _, w := range splitWords(n) {
			wc.parts[strings.ToLower(w)] = true
		}
		if len(tokens(n)) == 1 && strings.EqualFold(tokens(n)[0], n) && ordinary(n) {
			wc.words[strings.ToLower(n)] = true
			continue
		}
		raw = append(raw, n)
	}
	for _, w := range wc.list() {
		rep.ValuesOnly = append(rep.ValuesOnly, maskValue(w))
	}
	rep.Searched = len(raw) + len(wc.words)
	for _, u := range Unscannable(raw) {
		rep.Unscannable = append(rep.Unscannable, maskValue(u))
	}
	if len(raw) > 0 || !wc.empty() {
		leaks, err := ScanBytes(path, raw)
		if err != nil {
			return nil, err
		}
		for _, l := range leaks {
			rep.Leaks = append(rep.Leaks, l.String())
		}
		f, err := recfile.Open(path)
		if err != nil {
			return nil, err
		}
		wf, notes := checkWords(f.Recording(), wc)
		rep.Findings = mergeFindings(checkStrings(f.Recording(), raw), wf)
		rep.Notes = notes
		f.Close()
	}
	return rep, nil
}

// collectOnly gathers the original identifying values of a recording under
// a policy, without the output checks.
func collectOnly(f *recfile.File, pol *Policy, k *Key) (*Result, error) {
	return apply(f.Recording(), Options{Policy: pol, Pseudonymizer: NewPseudonymizer(k), InputPath: f.Path()}, false)
}
