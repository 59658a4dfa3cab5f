package recfile

import (
	"encoding/binary"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// TestSamplesRewrittenByAnotherWriter: a recording whose samples another
// tool rewrote (h5py, Debian python3-h5py) in another byte order, type,
// chunking or filter pipeline must read back the values h5py reads from the
// same file, bit for bit: the fast raw-chunk path may only decode what it
// knows (little-endian IEEE floats with muarc's own pipeline) and must hand
// the rest to the library, which converts.
func TestSamplesRewrittenByAnotherWriter(t *testing.T) {
	py := needH5py(t)
	dir := t.TempDir()
	src := filepath.Join(dir, "rec.h5")
	if err := Write(src, fixture(), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	const ds = "trials/ramp_30/arrays/ta_grid/samples"
	// h5py's create_dataset keyword arguments (testdata/rewrite_samples.py),
	// after the numpy type.
	variants := map[string][2]string{
		"big-endian float32, muarc's filters": {">f4", `{"chunks": [4096, 4], "shuffle": true, "compression": "gzip", "fletcher32": true}`},
		"big-endian float64, muarc's filters": {">f8", `{"chunks": [4096, 4], "shuffle": true, "compression": "gzip", "fletcher32": true}`},
		"little-endian float64, no shuffle":   {"<f8", `{"chunks": [1000, 6], "compression": "gzip", "fletcher32": true}`},
		"little-endian float32, contiguous":   {"<f4", `{}`},
		"big-endian float32, contiguous":      {">f4", `{}`},
		"little-endian float32, odd chunks":   {"<f4", `{"chunks": [777, 5], "shuffle": true, "compression": "gzip", "compression_opts": 9, "fletcher32": true}`},
	}
	i := 0
	for name, opts := range variants {
		i++
		path := filepath.Join(dir, "v"+string(rune('a'+i))+".h5")
		raw := path + ".f64"
		b, _ := os.ReadFile(src)
		os.WriteFile(path, b, 0o644)
		if out, err := exec.Command(py, "testdata/rewrite_samples.py", path, ds, opts[0], opts[1]).CombinedOutput(); err != nil {
			t.Fatalf("%s: h5py: %v\n%s", name, err, out)
		}
		script := `
import sys, h5py
with h5py.File(sys.argv[1], "r") as f:
    f["` + ds + `"][...].astype("<f8").tofile(sys.argv[2])
`
		if out, err := exec.Command(py, "-c", script, path, raw).CombinedOutput(); err != nil {
			t.Fatalf("%s: h5py: %v\n%s", name, err, out)
		}
		want := readF64File(t, raw)
		f, err := Open(path)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		a := f.Recording().Trials[0].Arrays[0]
		rows, cols := a.Samples.Shape()
		got := make([]float64, rows*cols)
		if err := a.Samples.ReadFloat64(0, got); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		one := make([]float32, rows)
		if err := a.Samples.(*ArraySamples).ReadRange32(0, rows, 2, 1, one); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		f.Close()
		if len(got) != len(want) {
			t.Fatalf("%s: %d values, h5py %d", name, len(got), len(want))
		}
		for k := range want {
			if math.Float64bits(got[k]) != math.Float64bits(want[k]) {
				t.Fatalf("%s: value %d (row %d, channel %d) reads %v, h5py reads %v", name, k, k/cols, k%cols, got[k], want[k])
			}
		}
		for r := range one {
			if float64(one[r]) != want[r*cols+2] && !(math.IsNaN(float64(one[r])) && math.IsNaN(want[r*cols+2])) {
				t.Fatalf("%s: channel 3 row %d reads %v, h5py reads %v", name, r, one[r], want[r*cols+2])
			}
		}
	}
}

func readF64File(t *testing.T, path string) []float64 {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	v := make([]float64, len(b)/8)
	for i := range v {
		v[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return v
}
