package analysis

import (
	"strings"
	"testing"

	"muarc/record"
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

func TestFindDecomposition(t *testing.T) {
	mk := func(names ...string) []record.Decomposition {
		var d []record.Decomposition
		for _, n := range names {
			d = append(d, record.Decomposition{Name: n})
		}
		return d
	}
	rec := &record.Recording{Trials: []record.Trial{
		{Name: "ramp_10", Arrays: []record.Array{{Name: "ta", Decompositions: mk("auto", "edited")}, {Name: "edl", Decompositions: mk("auto")}}},
		{Name: "ramp_30", Arrays: []record.Array{{Name: "ta", Decompositions: mk("auto")}}},
	}}
	find := func(s string, like *Found) (Found, error) {
		r, err := ParseDecompositionRef(s)
		if err != nil {
			t.Fatal(err)
		}
		return r.Find(rec, like)
	}
	a, err := find("f.h5#ramp_10/ta/auto", nil)
	if err != nil || a.Path() != "ramp_10/ta/auto" || a.TrialIndex != 0 || a.ArrayIndex != 0 || a.DecompositionIndex != 0 {
		t.Fatalf("full name: %+v %v", a, err)
	}
	// "#edited" beside A: A's trial and array.
	if b, err := find("#edited", &a); err != nil || b.Path() != "ramp_10/ta/edited" || b.DecompositionIndex != 1 {
		t.Errorf("#edited like A: %+v %v", b, err)
	}
	// "#edl/auto" beside A: A's trial, the named array.
	if b, err := find("#edl/auto", &a); err != nil || b.Path() != "ramp_10/edl/auto" || b.ArrayIndex != 1 {
		t.Errorf("#edl/auto like A: %+v %v", b, err)
	}
	if b, err := find("f.h5#edited", nil); err != nil || b.Path() != "ramp_10/ta/edited" {
		t.Errorf("unique short name: %+v %v", b, err)
	}
	if _, err := find("f.h5#auto", nil); err == nil || !strings.Contains(err.Error(), "ambiguous") || !strings.Contains(err.Error(), "ramp_30/ta/auto") {
		t.Errorf("ambiguous name: %v", err)
	}
	if _, err := find("f.h5#ramp_30/ta/edited", nil); err == nil || !strings.Contains(err.Error(), "there are: ramp_10/ta/auto") {
		t.Errorf("missing name: %v", err)
	}
	if _, err := find("f.h5", nil); err == nil {
		t.Errorf("file alone with four decompositions accepted")
	}
	if _, err := (DecompositionRef{File: "x"}).Find(&record.Recording{}, nil); err == nil || !strings.Contains(err.Error(), "no decompositions") {
		t.Errorf("empty recording: %v", err)
	}
}
