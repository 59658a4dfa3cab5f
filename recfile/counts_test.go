package recfile

import (
	"encoding/binary"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/record"
	"muarc/schema"
)

// TestPhysicalLinesAgree runs LAYOUT.md's h5py physical() over every array
// of the fixture (float32, float64, int16 counts of a decimal scale, int32
// counts of an EDF-style linear scale) and compares its float64 values bit
// for bit with what recfile's reader gives. h5py and numpy are the
// reference for the stored bytes; the formula is the layout's.
func TestPhysicalLinesAgree(t *testing.T) {
	py := needH5py(t)
	dir := t.TempDir()
	path := filepath.Join(dir, "rec.h5")
	if err := Write(path, fixture(), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	md := schema.Layout
	i := strings.Index(md, "def physical(s):")
	if i < 0 {
		t.Fatal("LAYOUT.md has no physical() for h5py")
	}
	def := md[i:]
	def = def[:strings.Index(def, "\n\n")+1]
	code := "import sys, h5py, numpy as np\n" + def + `
f = h5py.File(sys.argv[1], "r")
for t in sorted(f["trials"], key=lambda n: f["trials"][n].attrs["list_position"]):
    arrays = f["trials"][t]["arrays"]
    for a in sorted(arrays, key=lambda n: arrays[n].attrs["list_position"]):
        physical(arrays[a]["samples"]).astype("<f8").tofile(sys.argv[2] + "/" + t + "." + a + ".bin")
`
	if out, err := exec.Command(py, "-c", code, path, dir).CombinedOutput(); err != nil {
		t.Fatalf("h5py physical(): %v\n%s", err, out)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	kinds := map[record.SampleType]bool{}
	for _, tr := range f.Recording().Trials {
		for _, a := range tr.Arrays {
			rows, ch := a.Samples.Shape()
			got := make([]float64, rows*ch)
			if err := a.Samples.ReadFloat64(0, got); err != nil {
				t.Fatal(err)
			}
			raw, err := os.ReadFile(filepath.Join(dir, tr.Name+"."+a.Name+".bin"))
			if err != nil || len(raw) != 8*len(got) {
				t.Fatalf("%s/%s: h5py gave %d bytes (%v)", tr.Name, a.Name, len(raw), err)
			}
			for k, v := range got {
				w := binary.LittleEndian.Uint64(raw[8*k:])
				if math.Float64bits(v) != w && !(math.IsNaN(v) && math.IsNaN(math.Float64frombits(w))) {
					t.Fatalf("%s/%s (%s) value %d: muarc %v, h5py with LAYOUT.md's lines %v", tr.Name, a.Name, a.SampleType, k, v, math.Float64frombits(w))
				}
			}
			kinds[a.SampleType] = true
		}
	}
	if !kinds[record.Int16] || !kinds[record.Int32] || !kinds[record.Float32] || !kinds[record.Float64] {
		t.Fatalf("the fixture covers %v, want float32, float64, int16 and int32", kinds)
	}
}
