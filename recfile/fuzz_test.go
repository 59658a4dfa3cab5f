package recfile

import (
	"strings"
	"testing"
)

// FuzzHDF5Path feeds arbitrary JSON Pointers to HDF5Path: it must never
// panic, and always return an absolute HDF5 path.
func FuzzHDF5Path(f *testing.F) {
	view := map[string]any{
		"trials": []any{map[string]any{"name": "t1", "arrays": []any{map[string]any{"name": "g",
			"decompositions": []any{map[string]any{"name": "auto"}}}}}},
		"subject": map[string]any{"id": "x"},
	}
	for _, s := range []string{"", "/", "/trials", "/trials/0", "/trials/9/arrays", "/trials/0/arrays/0/channels/3/label",
		"/trials/0/arrays/0/decompositions/0/units/1/pnr_db", "/subject/name", "/a~1b/c~0d", "/trials/-1", "/trials/x/arrays/0",
		"/provenance/sources/0/sha256", "/trials/0/force/unit", "//", "/trials/0/arrays/0/decompositions"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, ptr string) {
		p := HDF5Path(view, ptr)
		if !strings.HasPrefix(p, "/") {
			t.Fatalf("HDF5Path(%q) = %q, not absolute", ptr, p)
		}
	})
}
