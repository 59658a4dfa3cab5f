package analysis

import (
	"strings"
	"testing"
)

func TestParseDecompositionRef(t *testing.T) {
	cases := []struct {
		in    string
		file  string
		parts string
		bad   bool
	}{
		{"s01.h5#ramp_30/ta_grid/auto", "s01.h5", "ramp_30|ta_grid|auto", false},
		{"s01.h5#ta_grid/auto", "s01.h5", "ta_grid|auto", false},
		{"#edited", "", "edited", false},
		{"s01.h5", "s01.h5", "", false},
		{"odd#name.h5#auto", "odd#name.h5", "auto", false},
		{"s01.h5#", "", "", true},
		{"s01.h5#a//b", "", "", true},
		{"s01.h5#a/b/c/d", "", "", true},
		{"", "", "", true},
	}
	for _, c := range cases {
		r, err := ParseDecompositionRef(c.in)
		if c.bad {
			if err == nil {
				t.Errorf("%q: accepted as %+v", c.in, r)
			}
			continue
		}
		if err != nil || r.File != c.file || strings.Join(r.Parts, "|") != c.parts {
			t.Errorf("%q: %+v, %v; want %q %q", c.in, r, err, c.file, c.parts)
		}
	}
}

func FuzzParseDecompositionRef(f *testing.F) {
	for _, s := range []string{"s01.h5#ramp_30/ta_grid/auto", "#edited", "a#b#c", "#", "x#/y", "", "a/b/c#d/e/f"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		r, err := ParseDecompositionRef(s)
		if err != nil {
			return
		}
		if len(r.Parts) > 3 {
			t.Fatalf("%q: %d parts", s, len(r.Parts))
		}
		// Joining the pieces back gives the input.
		back := r.File
		if r.Parts != nil {
			back += "#" + strings.Join(r.Parts, "/")
		}
		if back != s {
			t.Fatalf("%q parsed to %+v, which joins to %q", s, r, back)
		}
		for _, p := range r.Parts {
			if p == "" {
				t.Fatalf("%q: empty part accepted", s)
			}
		}
	})
}
