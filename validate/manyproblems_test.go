package validate

import (
	"slices"
	"strings"
	"testing"

	"muarc/record"
)

// TestSeveralProblemsAllReported: File reads one handle for every stage of
// its checks; a file with one problem for each stage reports all of them,
// each at its place. The problems: an MVC below zero (content checks on the
// model, written by recfile), then with h5py (Debian python3-h5py, outside
// muarc) a side outside the enumeration (the metadata view against the
// JSON Schema), two units sharing an id (structure), and after the edits
// the stale metadata digest (integrity); finally one byte of a samples
// chunk inverted (the Fletcher-32 scan).
func TestSeveralProblemsAllReported(t *testing.T) {
	needH5py(t)
	p, err := writeRecording(t, t.TempDir(), "many", func(r *record.Recording) { r.Trials[0].MVC = -1 })
	if err != nil {
		t.Fatal(err)
	}
	out := h5pyEdits(t, []string{p}, []string{`
A.attrs['side'] = 'up'
i = D['units/id'][...]; i[2] = i[0]; D['units/id'][...] = i
c = A['samples'].id.get_chunk_info(0); print(c.byte_offset + c.size // 2)
`})
	flipByte(t, p, out[0])
	r := File(p, DefaultOptions())
	if r.ReadError != "" {
		t.Fatalf("read error %q", r.ReadError)
	}
	want := []string{"checksum.chunk", "integrity.metadata_digest", "metadata.enum", "trial.mvc", "units.id_unique"}
	if got := dedup(checksOf(r.Findings, Error)); !slices.Equal(got, want) {
		t.Fatalf("errors %v, want %v\n%v", got, want, r.Findings)
	}
	where := map[string]string{
		"checksum.chunk":  "/trials/ramp_10/arrays/grid_a/samples",
		"metadata.enum":   "/trials/ramp_10/arrays/grid_a",
		"units.id_unique": "/trials/ramp_10/arrays/grid_a/decompositions/auto/units/id",
		"trial.mvc":       "/trials/ramp_10",
	}
	for _, f := range r.Findings {
		if w, ok := where[f.Check]; ok && !strings.HasPrefix(f.HDF5Path, w) {
			t.Errorf("%s at %q, want under %q", f.Check, f.HDF5Path, w)
		}
	}
}
