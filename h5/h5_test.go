package h5

import (
	"errors"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// writeTestFile makes a file with every kind of object the package writes.
func writeTestFile(t *testing.T, rows, cols, chunkRows, chunkCols int) (string, []float32) {
	t.Helper()
	name := filepath.Join(t.TempDir(), "t.h5")
	f, err := Create(name)
	if err != nil {
		t.Fatal(err)
	}
	root, err := f.Root()
	if err != nil {
		t.Fatal(err)
	}
	g, err := root.CreateGroup("grp")
	if err != nil {
		t.Fatal(err)
	}
	for _, kv := range []struct {
		k string
		v any
	}{{"s", "µV ünïcode"}, {"f", 2048.5}, {"i", int64(-7)}, {"b", true}, {"v", []float64{20, 500}}} {
		if err := g.SetAttr(kv.k, kv.v); err != nil {
			t.Fatal(err)
		}
	}
	for _, name := range []string{"zeta", "alpha", "mid"} {
		sub, err := g.CreateGroup(name)
		if err != nil {
			t.Fatal(err)
		}
		sub.Close()
	}
	if err := g.WriteColumn("labels", []string{"e1", "é2", ""}); err != nil {
		t.Fatal(err)
	}
	if err := g.WriteColumn("ids", []int64{3, 1, 2}); err != nil {
		t.Fatal(err)
	}
	if err := g.WriteColumn("ok", []bool{true, false, true}); err != nil {
		t.Fatal(err)
	}
	if err := g.WriteColumn("empty", []float64{}); err != nil {
		t.Fatal(err)
	}
	w, err := g.CreateMatrix("m", cols, false, chunkRows, chunkCols, 4)
	if err != nil {
		t.Fatal(err)
	}
	data := make([]float32, rows*cols)
	for i := range data {
		data[i] = float32(math.Sin(float64(i)*0.01)*100 + float64(i%7))
	}
	data[5] = float32(math.NaN())
	for r := 0; r < rows; r += chunkRows {
		end := min(r+chunkRows, rows)
		if err := w.WriteBand32(data[r*cols : end*cols]); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	g.Close()
	root.Close()
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	return name, data
}

func TestRoundTrip(t *testing.T) {
	name, data := writeTestFile(t, 1000, 11, 256, 4)
	f, err := Open(name)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	root, _ := f.Root()
	defer root.Close()
	g, err := root.OpenGroup("grp")
	if err != nil {
		t.Fatal(err)
	}
	defer g.Close()
	attrs, err := g.Attrs()
	if err != nil {
		t.Fatal(err)
	}
	m := AttrMap(attrs)
	if m["s"].Value != "µV ünïcode" || m["f"].Value != 2048.5 || m["i"].Value != int64(-7) || m["b"].Value != true || !reflect.DeepEqual(m["v"].Value, []float64{20, 500}) {
		t.Fatalf("attributes: %+v", attrs)
	}
	kids, _ := g.Children()
	var names []string
	for _, k := range kids {
		names = append(names, k.Name)
	}
	if got := strings.Join(names, ","); got != "zeta,alpha,mid,labels,ids,ok,empty,m" {
		t.Fatalf("creation order: %s", got)
	}
	d, err := g.OpenDataset("labels", 0)
	if err != nil {
		t.Fatal(err)
	}
	if s, err := d.Strings(); err != nil || !reflect.DeepEqual(s, []string{"e1", "é2", ""}) {
		t.Fatalf("labels %q %v", s, err)
	}
	d.Close()
	d, _ = g.OpenDataset("ok", 0)
	if b, err := d.Bools(); err != nil || !reflect.DeepEqual(b, []bool{true, false, true}) || d.Type != "bool" {
		t.Fatalf("bools %v %v %s", b, err, d.Type)
	}
	d.Close()
	d, _ = g.OpenDataset("m", 1<<20)
	defer d.Close()
	if !reflect.DeepEqual(d.Shape, []int{1000, 11}) || !reflect.DeepEqual(d.MaxShape, []int{-1, 11}) {
		t.Fatalf("shape %v %v", d.Shape, d.MaxShape)
	}
	got := make([]float32, 1000*11)
	// Reading through the library's filter pipeline verifies our Fletcher-32
	// and undoes our shuffle and deflate: the HDF5 library is the reference.
	if err := d.ReadSlab32([]int{0, 0}, []int{1000, 11}, got); err != nil {
		t.Fatal(err)
	}
	for i := range got {
		if math.Float32bits(got[i]) != math.Float32bits(data[i]) {
			t.Fatalf("sample %d: %v != %v", i, got[i], data[i])
		}
	}
	one := make([]float32, 300)
	if err := d.ReadSlab32([]int{600, 9}, []int{300, 1}, one); err != nil {
		t.Fatal(err)
	}
	for i, v := range one {
		if v != data[(600+i)*11+9] {
			t.Fatalf("channel read %d", i)
		}
	}
	// The parallel raw-chunk path agrees with the library's pipeline on
	// rectangles that cut chunks at every edge.
	for _, r := range [][4]int{{0, 1000, 0, 11}, {255, 2, 3, 2}, {1, 999, 10, 1}, {700, 300, 0, 5}, {999, 1, 0, 11}} {
		a := make([]float32, r[1]*r[3])
		b := make([]float32, r[1]*r[3])
		c := make([]float64, r[1]*r[3])
		if err := d.ReadRect32(r[0], r[1], r[2], r[3], a); err != nil {
			t.Fatal(err)
		}
		if err := d.ReadSlab32([]int{r[0], r[2]}, []int{r[1], r[3]}, b); err != nil {
			t.Fatal(err)
		}
		if err := d.ReadRect64(r[0], r[1], r[2], r[3], c); err != nil {
			t.Fatal(err)
		}
		for i := range a {
			if math.Float32bits(a[i]) != math.Float32bits(b[i]) || math.Float64bits(c[i]) != math.Float64bits(float64(b[i])) {
				t.Fatalf("rect %v value %d: %v vs %v vs %v", r, i, a[i], b[i], c[i])
			}
		}
	}
	chunk, filters, _ := d.Layout()
	if !reflect.DeepEqual(chunk, []int{256, 4}) || !reflect.DeepEqual(filters, []string{"shuffle", "deflate", "fletcher32"}) {
		t.Fatalf("layout %v %v", chunk, filters)
	}
}

func TestFletcher32KnownValues(t *testing.T) {
	// Fletcher-32 over 16-bit words; the classic check strings "abcde" and
	// "abcdef" give 0xF04FC729 and 0x56502D2A (Wikipedia, "Fletcher's
	// checksum", test vectors for little-endian words). HDF5 reads words
	// big-endian, so we feed the byte-swapped strings to get the same sums.
	swap := func(s string) []byte {
		b := []byte(s)
		for i := 0; i+1 < len(b); i += 2 {
			b[i], b[i+1] = b[i+1], b[i]
		}
		return b
	}
	if got := fletcher32(swap("abcdef")); got != 0x56502D2A {
		t.Fatalf("abcdef: %08x", got)
	}
	// "abcdefgh" -> 0xEBE19591 (same source).
	if got := fletcher32(swap("abcdefgh")); got != 0xEBE19591 {
		t.Fatalf("abcdefgh: %08x", got)
	}
}

func TestCorruptChunkIsReported(t *testing.T) {
	name, _ := writeTestFile(t, 1000, 11, 256, 4)
	f, _ := Open(name)
	root, _ := f.Root()
	g, _ := root.OpenGroup("grp")
	d, _ := g.OpenDataset("m", 0)
	chunks, err := d.Chunks()
	d.Close()
	g.Close()
	root.Close()
	f.Close()
	if err != nil || len(chunks) != 4*3 {
		t.Fatalf("chunks %d %v", len(chunks), err)
	}
	raw, _ := os.ReadFile(name)
	// Flip a byte in the middle of the matrix data: find the largest chunk
	// region by flipping inside the file's last quarter, which holds them.
	pos := len(raw) * 3 / 4
	raw[pos] ^= 0x55
	bad := filepath.Join(t.TempDir(), "bad.h5")
	os.WriteFile(bad, raw, 0o644)
	var faults []ChunkFault
	n, err := VerifyChunks(bad, func(c ChunkFault) { faults = append(faults, c) })
	if err != nil {
		t.Fatal(err)
	}
	if n < 12 || len(faults) != 1 || !errors.Is(faults[0].Err, ErrChecksum) || faults[0].Dataset != "/grp/m" {
		t.Fatalf("checked %d, faults %+v", n, faults)
	}
	// The normal read path fails too, with ErrChecksum, never silently.
	f, _ = Open(bad)
	defer f.Close()
	root, _ = f.Root()
	defer root.Close()
	g, _ = root.OpenGroup("grp")
	defer g.Close()
	d, _ = g.OpenDataset("m", 0)
	defer d.Close()
	all := make([]float32, 1000*11)
	err = d.ReadSlab32([]int{0, 0}, []int{1000, 11}, all)
	if !errors.Is(err, ErrChecksum) {
		t.Fatalf("read of a corrupt chunk: %v", err)
	}
	if err := d.ReadRect32(0, 1000, 0, 11, all); !errors.Is(err, ErrChecksum) {
		t.Fatalf("raw-chunk read of a corrupt chunk: %v", err)
	}
}

// TestH5pyReadsWhatWeWrite uses h5py (Debian python3-h5py), a general-purpose
// HDF5 reader, as the outside reference.
func TestH5pyReadsWhatWeWrite(t *testing.T) {
	py := needH5py(t)
	name, data := writeTestFile(t, 700, 5, 128, 2)
	out, err := exec.Command(py, "-c", `
import sys, h5py, numpy as np
f = h5py.File(sys.argv[1], "r")
g = f["grp"]
m = g["m"][()]
print(m.dtype, m.shape, g["m"].chunks, g["m"].shuffle, g["m"].compression, g["m"].fletcher32)
print(repr(g.attrs["s"]), g.attrs["f"], g.attrs["i"], g.attrs["b"], list(g.attrs["v"]))
print([x.decode() if isinstance(x, bytes) else x for x in g["labels"][()]], list(g["ok"][()]), list(g["ids"][()]))
print(list(g.keys()))
print(repr(float(m[3, 4])), repr(float(m[699, 0])))
`, name).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	want0 := "float32 (700, 5) (128, 2) True gzip True"
	if lines[0] != want0 {
		t.Fatalf("h5py layout %q, want %q", lines[0], want0)
	}
	if lines[1] != "'µV ünïcode' 2048.5 -7 True [20.0, 500.0]" {
		t.Fatalf("h5py attrs %q", lines[1])
	}
	if lines[2] != "['e1', 'é2', ''] [True, False, True] [3, 1, 2]" {
		t.Fatalf("h5py columns %q", lines[2])
	}
	// h5py follows the tracked creation order, as muarc's reader does.
	if lines[3] != "['zeta', 'alpha', 'mid', 'labels', 'ids', 'ok', 'empty', 'm']" {
		t.Fatalf("h5py keys %q", lines[3])
	}
	wantVals := strings.Fields(lines[4])
	if len(wantVals) != 2 || wantVals[0] != fmtF(data[3*5+4]) || wantVals[1] != fmtF(data[699*5]) {
		t.Fatalf("h5py values %q vs %s %s", lines[4], fmtF(data[3*5+4]), fmtF(data[699*5]))
	}
}
