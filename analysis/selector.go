package analysis

import (
	"fmt"
	"strings"

	"muarc/record"
)

// DecompositionRef names one decomposition on the command line:
// FILE#TRIAL/ARRAY/DECOMPOSITION, with leading parts optional.
type DecompositionRef struct {
	// File is the path before the last '#'; empty for "#..." (the other
	// file of a comparison).
	File string
	// Parts are the 0 to 3 names after '#': the rightmost is the
	// decomposition, then the array, then the trial.
	Parts []string
}

// ParseDecompositionRef splits s at its last '#' into a file and up to
// three slash-separated names. "FILE" alone has no parts; "#NAME" has no
// file. Empty names, more than three parts and an empty string are errors.
func ParseDecompositionRef(s string) (DecompositionRef, error) {
	file, sel, has := s, "", false
	if i := strings.LastIndex(s, "#"); i >= 0 {
		file, sel, has = s[:i], s[i+1:], true
	}
	r := DecompositionRef{File: file}
	if !has {
		if file == "" {
			return r, fmt.Errorf("empty decomposition name; give FILE#TRIAL/ARRAY/DECOMPOSITION")
		}
		return r, nil
	}
	if sel == "" {
		return r, fmt.Errorf("%q: nothing after '#'; give TRIAL/ARRAY/DECOMPOSITION, ARRAY/DECOMPOSITION or DECOMPOSITION", s)
	}
	r.Parts = strings.Split(sel, "/")
	if len(r.Parts) > 3 {
		return r, fmt.Errorf("%q: at most three names after '#' (TRIAL/ARRAY/DECOMPOSITION)", s)
	}
	for _, p := range r.Parts {
		if p == "" {
			return r, fmt.Errorf("%q: empty name in %q", s, sel)
		}
	}
	return r, nil
}

// Found is a decomposition located in a recording.
type Found struct {
	Trial, Array, Decomposition string
	// TrialIndex, ArrayIndex and DecompositionIndex locate it in the
	// recording's slices.
	TrialIndex, ArrayIndex, DecompositionIndex int
}

// Path is "TRIAL/ARRAY/DECOMPOSITION".
func (f Found) Path() string { return f.Trial + "/" + f.Array + "/" + f.Decomposition }

// Find locates the one decomposition of rec that r names. When like is not
// nil, a left-out trial is like's trial, and a left-out array (only the
// decomposition named) is like's array: "#edited" beside A means A's trial
// and array. No match or more than one is an error listing the choices.
func (r DecompositionRef) Find(rec *record.Recording, like *Found) (Found, error) {
	var trial, array, decomp string
	switch len(r.Parts) {
	case 3:
		trial, array, decomp = r.Parts[0], r.Parts[1], r.Parts[2]
	case 2:
		array, decomp = r.Parts[0], r.Parts[1]
	case 1:
		decomp = r.Parts[0]
	}
	if like != nil {
		if trial == "" {
			trial = like.Trial
		}
		if array == "" && len(r.Parts) < 2 {
			array = like.Array
		}
	}
	var found []Found
	var all []string
	for ti := range rec.Trials {
		tr := &rec.Trials[ti]
		for ai := range tr.Arrays {
			arr := &tr.Arrays[ai]
			for di := range arr.Decompositions {
				f := Found{tr.Name, arr.Name, arr.Decompositions[di].Name, ti, ai, di}
				all = append(all, f.Path())
				if (trial == "" || trial == f.Trial) && (array == "" || array == f.Array) && (decomp == "" || decomp == f.Decomposition) {
					found = append(found, f)
				}
			}
		}
	}
	want := func(s string) string {
		if s == "" {
			return "*"
		}
		return s
	}
	switch {
	case len(found) == 1:
		return found[0], nil
	case len(all) == 0:
		return Found{}, fmt.Errorf("the recording has no decompositions")
	case len(found) == 0:
		return Found{}, fmt.Errorf("no decomposition %s/%s/%s (there are: %s)", want(trial), want(array), want(decomp), strings.Join(all, ", "))
	}
	var names []string
	for _, f := range found {
		names = append(names, f.Path())
	}
	return Found{}, fmt.Errorf("%s/%s/%s is ambiguous: it matches %s; name it as FILE#TRIAL/ARRAY/DECOMPOSITION", want(trial), want(array), want(decomp), strings.Join(names, ", "))
}
