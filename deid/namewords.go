package deid

import (
	"fmt"
	"sort"
	"strings"
	"unicode"

	"muarc/record"
)

// A part of a person's name that is an ordinary word (a subject called
// Hand, Mass, Long or Rest) cannot be searched like other needles: the
// layout's own names (edited_by_hand, mass_kg) and ordinary language
// ("right hand", "long contraction") hold it by design. It is searched in
// the values of an output only, token by token, and judged by how the
// value uses it:
//
//   - a finding (the file is refused, the field named) where the value uses
//     it as a name or code: glued to digits or a code with nothing between
//     ("Hand01", "HandS01", "MRNHand"), or capitalised next to one
//     ("Hand_01"); joined or next to another part of the name that is not
//     an ordinary word ("IlvanaHand", "Ilvana Hand", "Hand, Ilvana"); after
//     a title ("Mr Hand"); the whole value when capitalised ("Hand"); among
//     numbers and codes only ("Hand 01", "hand_s01"); or capitalised
//     inside lower-case language ("son of Hand");
//   - a note naming the field, not a refusal, where it is a word among
//     words or codes: lower-case language ("right hand", "edited_by_hand",
//     "long_ramp_01", "ta_grid"), the value's first word, or a title-case
//     value ("Hand grip at 30 %", "Right Hand Grip").
//
// Never silent: every occurrence is a finding or a note.

// wordCheck holds the ordinary-word name parts of one recording.
type wordCheck struct {
	// words are the ordinary-word name parts, lower case.
	words map[string]bool
	// parts are every part of the names, lower case.
	parts map[string]bool
}

// newWordCheck makes a wordCheck from people's names: each part of three
// or more letters that is an ordinary word is searched.
func newWordCheck(names ...string) *wordCheck {
	wc := &wordCheck{words: map[string]bool{}, parts: map[string]bool{}}
	for _, n := range names {
		wc.add(n)
	}
	return wc
}

func (wc *wordCheck) add(name string) {
	for _, p := range splitWords(name) {
		lp := strings.ToLower(p)
		wc.parts[lp] = true
		if len([]rune(p)) >= MinNeedleRunes && ordinary(p) {
			wc.words[lp] = true
		}
	}
}

func (wc *wordCheck) empty() bool { return wc == nil || len(wc.words) == 0 }

// list returns the words searched, sorted (they identify: never print).
func (wc *wordCheck) list() []string {
	if wc == nil {
		return nil
	}
	var out []string
	for w := range wc.words {
		out = append(out, w)
	}
	sort.Strings(out)
	return out
}

// nameTok is one token of a word of a value.
type nameTok struct {
	s     string
	digit bool
	glued bool // follows the previous token with no character between
}

// tokenKind says what a token is to the judgement.
type tokenKind int

const (
	kindCode tokenKind = iota // digits, a single letter, or letters that are not an ordinary word
	kindName                  // a part of the names that is not an ordinary word
	kindWord                  // an ordinary word (a name part that is one too)
)

func (wc *wordCheck) kind(t nameTok) tokenKind {
	lt := strings.ToLower(t.s)
	switch {
	case t.digit || len([]rune(t.s)) == 1:
		return kindCode
	case wc.parts[lt] && !wc.words[lt]:
		return kindName
	case ordinary(t.s):
		return kindWord
	}
	return kindCode
}

// valueTokens splits a word of a value into tokens: runs of digits and
// runs of letters, a run of letters split where a small letter is followed
// by a capital ("AnnaHand") and before the last capital of a run of
// capitals followed by a small letter ("MRNHand"); any other character
// separates tokens. A possessive "'s" is not a token.
func valueTokens(word string) []nameTok {
	for _, suf := range []string{"'s", "’s", "'S"} {
		word = strings.TrimSuffix(word, suf)
	}
	rs := []rune(word)
	var out []nameTok
	start, sep := -1, true
	flush := func(end int) {
		if start >= 0 {
			out = append(out, nameTok{s: string(rs[start:end]), digit: unicode.IsDigit(rs[start]), glued: !sep})
			sep = false
		}
		start = -1
	}
	for i, r := range rs {
		letter, digit := unicode.IsLetter(r), unicode.IsDigit(r)
		if !letter && !digit {
			flush(i)
			sep = true
			continue
		}
		if start >= 0 {
			prev := rs[i-1]
			split := unicode.IsDigit(prev) != digit ||
				letter && unicode.IsLower(prev) && unicode.IsUpper(r) ||
				letter && unicode.IsUpper(prev) && unicode.IsUpper(r) && i+1 < len(rs) && unicode.IsLower(rs[i+1])
			if split {
				flush(i)
			}
		}
		if start < 0 {
			start = i
		}
	}
	flush(len(rs))
	return out
}

// titles are words that stand before a family name (English and a few
// other languages), lower case, without a full stop.
var titles = map[string]bool{"mr": true, "mrs": true, "ms": true, "miss": true, "mx": true, "dr": true, "prof": true,
	"sir": true, "madam": true, "frau": true, "herr": true, "fr": true, "hr": true, "mme": true, "mlle": true, "sr": true, "sra": true, "srta": true}

// wordHit is the judgement of one value.
type wordHit struct {
	word    string // the name part found (lower case)
	finding bool
	why     string
}

// judge returns the judgement of value v: the first finding, else the
// first note; ok is false when no name word occurs in v.
func (wc *wordCheck) judge(v string) (hit wordHit, ok bool) {
	if wc.empty() {
		return hit, false
	}
	raw := strings.Fields(v)
	words := make([][]nameTok, len(raw))
	for i, w := range raw {
		words[i] = valueTokens(w)
	}
	for wi, toks := range words {
		for ti, t := range toks {
			lw := strings.ToLower(t.s)
			if t.digit || !wc.words[lw] {
				continue
			}
			why := wc.occurrence(raw, words, wi, ti)
			h := wordHit{word: lw, finding: why != "", why: why}
			if h.finding {
				return h, true
			}
			if !ok {
				hit, ok = h, true
			}
		}
	}
	return hit, ok
}

// occurrence judges the name word words[wi][ti]: the reason it reads as a
// name or code, or "" when it reads as a word among words.
func (wc *wordCheck) occurrence(raw []string, words [][]nameTok, wi, ti int) string {
	toks := words[wi]
	t := toks[ti]
	capital := unicode.IsUpper([]rune(t.s)[0])
	if len(toks) > 1 {
		anyWord, digits := false, false
		for k, o := range toks {
			if k == ti {
				continue
			}
			digits = digits || o.digit
			switch wc.kind(o) {
			case kindName:
				return "joined to another part of the name"
			case kindWord:
				anyWord = true
			}
		}
		for _, k := range []int{ti - 1, ti + 1} {
			if k < 0 || k >= len(toks) || wc.kind(toks[k]) != kindCode {
				continue
			}
			if toks[max(k, ti)].glued || capital {
				return "joined to a number or code"
			}
		}
		if !anyWord && digits {
			return "joined to numbers or codes only"
		}
		return ""
	}
	single := func(k int) (nameTok, bool) {
		if k < 0 || k >= len(words) || len(words[k]) != 1 {
			return nameTok{}, false
		}
		return words[k][0], true
	}
	if p, ok := single(wi - 1); ok && titles[strings.ToLower(p.s)] {
		return "after a title"
	}
	for _, k := range []int{wi - 1, wi + 1} {
		if n, ok := single(k); ok && wc.kind(n) == kindName {
			return "next to another part of the name"
		}
	}
	others, anyWord, digits, capitalised, lowerLong := 0, false, false, 0, false
	for k, ws := range words {
		if k == wi || len(ws) == 0 {
			continue
		}
		others++
		for _, o := range ws {
			digits = digits || o.digit
			if wc.kind(o) == kindWord {
				anyWord = true
				first := []rune(o.s)[0]
				switch {
				case unicode.IsUpper(first):
					capitalised++
				case len(o.s) >= 4:
					lowerLong = true
				}
			}
		}
	}
	switch {
	case others == 0 && capital:
		return "the whole value, capitalised like a name"
	case others == 0:
		return ""
	case !anyWord && (digits || capital):
		return "among numbers and codes only"
	}
	sentenceStart := wi == 0 || strings.ContainsAny(raw[wi-1][len(raw[wi-1])-1:], ".!?:;")
	titleCase := capitalised >= 2 && !lowerLong
	if capital && !sentenceStart && !titleCase {
		return "capitalised inside the value, like a name"
	}
	return ""
}

// checkWords judges every value of r (not the names of extra fields and
// columns, which are the lab's vocabulary) for the ordinary-word name
// parts: findings for values that use one as a name or code, notes for
// values that use it as a word. Values are masked.
func checkWords(r *record.Recording, wc *wordCheck) (findings []Finding, notes []string) {
	if wc.empty() {
		return nil, nil
	}
	walkStrings(r, func(path, s string) {
		if s == "" || strings.HasSuffix(path, nameSuffix) {
			return
		}
		h, ok := wc.judge(s)
		switch {
		case !ok:
		case h.finding:
			findings = append(findings, finding(r, path, s, fmt.Sprintf("holds %s, a part of the name that is an ordinary word, used as a name or code (%s)", maskValue(h.word), h.why)))
		default:
			notes = append(notes, fmt.Sprintf("%s holds %s, a part of the name that is an ordinary word, used as a word there: read it before sharing", path, maskValue(h.word)))
		}
	})
	sort.Slice(findings, func(i, j int) bool { return findings[i].Path < findings[j].Path })
	return findings, notes
}
