package analysis

import (
	"fmt"
	"strings"
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
