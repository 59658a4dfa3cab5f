package validate

import (
	"math"
	"strings"
	"testing"

	"muarc/record"
)

// Infinities put into the stored EMG samples by h5py (Debian python3-h5py,
// outside muarc) are found by validate's band-by-band scan, with the right
// sample and channel across the band boundary (20000 rows, bands of
// recfile.DefaultChunkRows = 16384), for float32 and float64 samples; the
// scan runs with the chunk scan only.
func TestStoredInfinitiesInEMGSamples(t *testing.T) {
	dir := t.TempDir()
	var paths []string
	for _, wide := range []bool{false, true} {
		name := "f32"
		if wide {
			name = "f64"
		}
		p, err := writeRecording(t, dir, name, func(r *record.Recording) {
			const rows, nch = 20000, 8
			m := &record.MemSamples{Samples: rows, Channels: nch}
			if wide {
				m.F64 = make([]float64, rows*nch)
				r.Trials[0].Arrays[0].SampleType = record.Float64
			} else {
				m.F32 = make([]float32, rows*nch)
			}
			for i := 0; i < rows*nch; i++ {
				if wide {
					m.F64[i] = math.Sin(float64(i) * 0.01)
				} else {
					m.F32[i] = float32(math.Sin(float64(i) * 0.01))
				}
			}
			r.Trials[0].Arrays[0].Samples = m
		})
		if err != nil {
			t.Fatal(err)
		}
		paths = append(paths, p)
	}
	clean := File(paths[0], DefaultOptions())
	for _, f := range clean.Findings {
		if f.Check == "values.infinite" {
			t.Fatalf("a clean file: %v", f)
		}
	}
	edit := "A['samples'][18000, 5] = np.inf\nA['samples'][19999, 0] = -np.inf\nA['samples'][3, 2] = np.nan\nprint(A['samples'].dtype)"
	outs := h5pyEdits(t, paths, []string{edit, edit})
	if outs[0] != "float32" || outs[1] != "float64" {
		t.Fatalf("h5py sees %v", outs)
	}
	for _, p := range paths {
		rep := File(p, DefaultOptions())
		var got []string
		for _, f := range rep.Findings {
			if f.Check == "values.infinite" {
				got = append(got, f.HDF5Path+": "+f.Message)
			}
		}
		want := "/trials/ramp_10/arrays/grid_a/samples: EMG samples hold 2 infinities (first at sample 18000, channel 6 (e6): +Inf)"
		if strings.Join(got, "\n") != want {
			t.Errorf("%s: got %q, want %q", p, got, want)
		}
		opt := DefaultOptions()
		opt.ChecksumScan = false
		for _, f := range File(p, opt).Findings {
			if f.Check == "values.infinite" && strings.Contains(f.HDF5Path, "samples") {
				t.Errorf("scanned without the chunk scan: %v", f)
			}
		}
	}
}
