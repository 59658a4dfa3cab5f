package deid

import (
	"bufio"
	"bytes"
	"compress/gzip"
	_ "embed"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"unicode"

	"muarc/record"
	"muarc/schema"
)

// Needles are the original values an output must not hold. This file makes
// them from the values a policy takes out: the whole value, its dates in
// their common spellings, and its parts (the words of four letters or more
// of free text and places, name parts of three or more, long numbers and
// codes). A part that is an ordinary word (an English word, or a word of
// the layout's own vocabulary such as "hand" in edited_by_hand or "mass" in
// mass_kg) is not searched on its own: the output holds such words by
// design, and a subject called Hand or Mass must not be refused for them.
// It is still searched inside the whole value and the name's spellings.

//go:embed words/english.txt.gz
var englishGz []byte

var (
	ordinaryOnce sync.Once
	ordinarySet  map[string]bool
)

// ordinary reports whether w (any case) is an ordinary word: an English
// word of the embedded list or a word of the layout (LAYOUT.md and the
// field registry's names and values).
func ordinary(w string) bool {
	ordinaryOnce.Do(loadOrdinary)
	return ordinarySet[strings.ToLower(w)]
}

func loadOrdinary() {
	ordinarySet = map[string]bool{}
	if zr, err := gzip.NewReader(bytes.NewReader(englishGz)); err == nil {
		sc := bufio.NewScanner(zr)
		for sc.Scan() {
			if w := sc.Text(); w != "" && w[0] != '#' {
				ordinarySet[w] = true
			}
		}
	}
	addWords := func(s string) {
		for _, w := range splitWords(s) {
			ordinarySet[strings.ToLower(w)] = true
		}
	}
	addWords(schema.Layout)
	addWords(Caution)
	for _, f := range schema.Fields {
		addWords(f.Name)
		addWords(f.Meaning)
		for _, e := range f.Enum {
			addWords(e)
		}
	}
	for _, sig := range hdf5Signatures {
		ordinarySet[sig] = true
	}
}

// hdf5Signatures are the 4-letter signatures HDF5 writes before its
// internal structures (HDF5 file format specification, version 2 and 3
// structures); they are in every file's bytes.
var hdf5Signatures = []string{"tree", "heap", "snod", "ohdr", "ochk", "gcol", "frhp", "fhdb", "fhib", "fshd", "fsse", "bthd", "btin", "btlf", "fahd", "fadb", "eahd", "eaib", "eadb", "easb", "sphs", "sphd"}

// splitWords returns the runs of letters of s.
func splitWords(s string) []string {
	return strings.FieldsFunc(s, func(r rune) bool { return !unicode.IsLetter(r) })
}

// tokens returns the runs of letters and digits of s.
func tokens(s string) []string {
	return strings.FieldsFunc(s, func(r rune) bool { return !unicode.IsLetter(r) && !unicode.IsDigit(r) })
}

// valueNeedles are the needles of an identifying value a policy takes out:
// the whole value (unless it is one ordinary word), its date spellings
// when it is a date, and its parts (partNeedles). minLetters is the
// shortest word searched on its own (3 for names, 4 for free text).
func valueNeedles(v string, minLetters int) []string {
	v = strings.TrimSpace(v)
	if v == "" {
		return nil
	}
	var out []string
	if d := DateSpellings(v); d != nil {
		out = append(out, d...)
	}
	if !(len(tokens(v)) == 1 && ordinary(tokens(v)[0]) && strings.EqualFold(tokens(v)[0], v)) {
		out = append(out, v)
	}
	return append(out, partNeedles(v, minLetters)...)
}

// partNeedles are the parts of a value searched on their own: words of
// minLetters letters or more that are not ordinary words, numbers of five
// or more digits, and tokens mixing letters with five or more digits
// (record and licence numbers: "MRN5520917"). Shorter codes ("grid2",
// "30pct", "e12") name trials and electrodes as often as people and are
// searched only inside the whole value.
func partNeedles(v string, minLetters int) []string {
	var out []string
	for _, t := range tokens(v) {
		digits := 0
		for _, r := range t {
			if unicode.IsDigit(r) {
				digits++
			}
		}
		if digits >= 5 {
			out = append(out, t)
		}
		for _, d := range strings.FieldsFunc(t, func(r rune) bool { return !unicode.IsDigit(r) }) {
			if len(d) >= 5 && d != t {
				out = append(out, d)
			}
		}
		out = append(out, wordNeedles(t, minLetters)...)
	}
	return out
}

// wordNeedles are the words of v of minLetters letters or more that are
// not ordinary words.
func wordNeedles(v string, minLetters int) []string {
	var out []string
	for _, w := range splitWords(v) {
		if len([]rune(w)) >= minLetters && !ordinary(w) {
			out = append(out, w)
		}
	}
	return out
}

// nameNeedles are the needles of a person's name: the name as written, its
// parts run together and in the other order ("AnnaHallbeck", "Hallbeck,
// Anna", "Hallbeck_Anna"), and each part of three or more letters that is
// not an ordinary word.
func nameNeedles(name string) []string {
	out := valueNeedles(name, 3)
	parts := splitWords(name)
	if len(parts) >= 2 {
		first, last := parts[0], parts[len(parts)-1]
		for _, sep := range []string{"", " ", "_", ".", "-", ", "} {
			out = append(out, first+sep+last, last+sep+first)
		}
	}
	return out
}

// extraNeedles are the needles of an extra value the policy takes out:
// text as free text, whole numbers of five or more digits.
func extraNeedles(v any) []string {
	switch x := v.(type) {
	case string:
		return valueNeedles(x, 4)
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

// needlesOf returns the needles of a string field's original value by its
// class: dates in their spellings, names and free text with their parts.
func needlesOf(v string, c schema.Class) []string {
	if c == schema.ClassDate || c == schema.ClassTime {
		return DateSpellings(v)
	}
	return valueNeedles(v, 4)
}

// sourceNeedles are a source file name as listed, its base name and its
// parts (a name or a code inside "hallbeck_s01_force.csv"). The stem alone
// ("force") is an ordinary word and not searched.
func sourceNeedles(name string) []string {
	name = strings.ReplaceAll(name, "\\", "/")
	out := []string{name, filepath.Base(name)}
	return append(out, wordNeedles(name, 4)...)
}

// collectNeedles adds the input file's absolute path and folder (an output
// must hold no absolute path, least of all its source's) and the parts of
// its name.
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
	a.needles = append(a.needles, wordNeedles(filepath.Base(input), 4)...)
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
