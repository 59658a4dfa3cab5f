package deid

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
	"muarc/validate"
)

// rawCopyRecording is a recording whose samples span several chunk bands
// (40,960 rows of 16,384-row chunks, the last band short) and a last
// chunk column narrower than the rest (18 channels of 4-column chunks):
// one float32 array from the generator and one of int16 counts.
func rawCopyRecording() *record.Recording {
	nan := math.NaN()
	chans := func(n int) []record.Channel {
		c := make([]record.Channel, n)
		for i := range c {
			c[i] = record.Channel{Label: fmt.Sprintf("e%02d", i+1), Row: i / 6, Column: i % 6, XMm: float64(i%6) * 8, YMm: float64(i/6) * 8, Usable: true}
		}
		return c
	}
	rows := 40960
	counts := &record.MemCounts{Samples: rows, Channels: 7, Counts: make([]int32, rows*7), CountScale: record.LinearScale(0.1907, 0)}
	r := rand.New(rand.NewPCG(3, 4))
	for i := range counts.Counts {
		counts.Counts[i] = int32(r.IntN(4001)) - 2000
	}
	return &record.Recording{
		Study:   record.Study{ID: "raw-copy"},
		Subject: record.Subject{ID: "RC07", Name: "Ilvana Treskow", AgeYears: nan, HeightCm: nan, MassKg: nan},
		Trials: []record.Trial{{Name: "hold", TargetPctMVC: 30, MVC: 250, MVCUnit: "N", Arrays: []record.Array{
			{Name: "grid_a", Rows: 3, Columns: 6, IEDMm: 8, Gain: nan, FilterLowHz: nan, FilterHighHz: nan, SamplingRateHz: 2048, Unit: "uV",
				Channels: chans(18), Samples: synth.BenchSource(18, 2048, 20, 5)},
			{Name: "grid_b", Rows: 2, Columns: 4, IEDMm: 8, Gain: nan, FilterLowHz: nan, FilterHighHz: nan, SamplingRateHz: 2048, Unit: "uV",
				Channels: chans(7), Samples: counts, SampleType: record.Int16, Scale: counts.CountScale},
		}}},
	}
}

// rawCopySource writes rawCopyRecording into dir/src/rec.h5.
func rawCopySource(t *testing.T, dir string) string {
	t.Helper()
	in := filepath.Join(dir, "src", "rec.h5")
	os.MkdirAll(filepath.Dir(in), 0o755)
	if err := recfile.Write(in, rawCopyRecording(), recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	return in
}

// compareSamplesScript has h5py (Debian python3-h5py, a reader muarc did
// not write) describe every samples dataset of two files: the SHA-256 of
// the values' bits (numpy tobytes), dtype with byte order, shape, chunk
// shape and filters, and whether every stored chunk is byte for byte the
// same in both (h5py's read_direct_chunk over the chunk grid).
const compareSamplesScript = `
import sys, json, hashlib, h5py
def desc(f, name):
    d = f[name]
    return {"sha256": hashlib.sha256(d[()].tobytes()).hexdigest(), "dtype": d.dtype.str,
            "shape": list(d.shape), "chunks": list(d.chunks) if d.chunks else None,
            "filters": [d.shuffle, d.compression, d.fletcher32]}
def names(f):
    out = []
    f.visititems(lambda n, o: out.append(n) if isinstance(o, h5py.Dataset) and n.endswith("/samples") else None)
    return sorted(out)
a, b = h5py.File(sys.argv[1], "r"), h5py.File(sys.argv[2], "r")
res = {"in": {n: desc(a, n) for n in names(a)}, "out": {n: desc(b, n) for n in names(b)}, "same_chunks": {}}
for n in names(a):
    da, db = a[n], b.get(n)
    same = db is not None and da.chunks is not None and da.chunks == db.chunks
    if same:
        for r in range(0, da.shape[0], da.chunks[0]):
            for c in range(0, da.shape[1], da.chunks[1]):
                if da.id.read_direct_chunk((r, c)) != db.id.read_direct_chunk((r, c)):
                    same = False
    res["same_chunks"][n] = same
print(json.dumps(res))
`

type samplesDesc struct {
	SHA256  string `json:"sha256"`
	Dtype   string `json:"dtype"`
	Shape   []int  `json:"shape"`
	Chunks  []int  `json:"chunks"`
	Filters []any  `json:"filters"`
}

type samplesComparison struct {
	In, Out    map[string]samplesDesc
	SameChunks map[string]bool `json:"same_chunks"`
}

func compareSamples(t *testing.T, py, in, out string) samplesComparison {
	t.Helper()
	b, err := exec.Command(py, "-c", compareSamplesScript, in, out).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, b)
	}
	var c samplesComparison
	if err := json.Unmarshal(b, &c); err != nil {
		t.Fatalf("%v: %s", err, b)
	}
	return c
}

// TestRawCopyAgainstH5py: de-identifying a recording muarc wrote copies
// its samples chunk by chunk (the report counts both arrays as copied
// raw); h5py reads the same values bit for bit from input and output, the
// same dtype, chunk shape and filters, and the very same stored chunks.
// With the copy switched off the values and encoding are the same again
// (recompressed chunks), so both paths agree.
func TestRawCopyAgainstH5py(t *testing.T) {
	py := needPython(t)
	dir := t.TempDir()
	in := rawCopySource(t, dir)
	key, _ := KeyFromBytes(make([]byte, 32))
	for _, decode := range []bool{false, true} {
		out := filepath.Join(dir, fmt.Sprintf("out-%v.h5", decode))
		rep, err := DeidentifyFile(in, out, StudyOptions{Key: key, decodeSamples: decode})
		if err != nil || rep.Written != 1 {
			t.Fatalf("decode %v: %v %+v", decode, err, rep.Files)
		}
		fo := rep.Files[0]
		wantRaw := 2
		if decode {
			wantRaw = 0
		}
		if fo.RawCopied != wantRaw || fo.DataChecked < 2 {
			t.Fatalf("decode %v: %d sample datasets copied raw (want %d), %d datasets checked", decode, fo.RawCopied, wantRaw, fo.DataChecked)
		}
		c := compareSamples(t, py, in, out)
		if len(c.In) != 2 || len(c.Out) != 2 {
			t.Fatalf("samples datasets: in %v, out %v", c.In, c.Out)
		}
		for name, a := range c.In {
			b := c.Out[name]
			if a.SHA256 != b.SHA256 || a.Dtype != b.Dtype || fmt.Sprint(a.Shape) != fmt.Sprint(b.Shape) ||
				fmt.Sprint(a.Chunks) != fmt.Sprint(b.Chunks) || fmt.Sprint(a.Filters) != fmt.Sprint(b.Filters) {
				t.Errorf("decode %v: %s: input %+v, output %+v", decode, name, a, b)
			}
			if fmt.Sprint(a.Filters) != "[true gzip true]" || a.Chunks[0] != recfile.DefaultChunkRows {
				t.Errorf("%s: input stored as %+v, not as muarc writes samples", name, a)
			}
			if !decode && !c.SameChunks[name] {
				t.Errorf("%s: the raw copy's stored chunks differ from the input's", name)
			}
		}
		if c.In["trials/hold/arrays/grid_b/samples"].Dtype != "<i2" || c.In["trials/hold/arrays/grid_a/samples"].Shape[0] != 40960 {
			t.Errorf("fixture: %+v", c.In)
		}
	}
}

// TestOtherEncodingsAreDecoded: samples rewritten by h5py in another
// encoding (big-endian with muarc's filters, deflate without shuffle,
// contiguous) are not copied raw: they are decoded and written in muarc's
// encoding, and h5py reads the same values from input and output.
func TestOtherEncodingsAreDecoded(t *testing.T) {
	py := needPython(t)
	dir := t.TempDir()
	src := rawCopySource(t, dir)
	const ds = "trials/hold/arrays/grid_a/samples"
	// numpy type and h5py's create_dataset arguments
	// (recfile/testdata/rewrite_samples.py)
	variants := map[string][2]string{
		"big-endian": {">f4", `{"chunks": [16384, 4], "shuffle": true, "compression": "gzip", "fletcher32": true}`},
		"no-shuffle": {"<f4", `{"chunks": [16384, 4], "compression": "gzip", "fletcher32": true}`},
		"contiguous": {"<f4", `{}`},
	}
	key, _ := KeyFromBytes(make([]byte, 32))
	for name, opts := range variants {
		in := filepath.Join(dir, name, "rec.h5")
		os.MkdirAll(filepath.Dir(in), 0o755)
		b, _ := os.ReadFile(src)
		os.WriteFile(in, b, 0o644)
		if out, err := exec.Command(py, "../recfile/testdata/rewrite_samples.py", in, ds, opts[0], opts[1]).CombinedOutput(); err != nil {
			t.Fatalf("%s: h5py: %v\n%s", name, err, out)
		}
		out := filepath.Join(dir, name+"-out.h5")
		rep, err := DeidentifyFile(in, out, StudyOptions{Key: key})
		if err != nil || rep.Written != 1 {
			t.Fatalf("%s: %v %+v", name, err, rep.Files)
		}
		// grid_b (int16 counts, untouched) is still copied raw.
		if fo := rep.Files[0]; fo.RawCopied != 1 || fo.DataChecked < 2 {
			t.Errorf("%s: %d sample datasets copied raw (want 1, grid_b), %d checked", name, fo.RawCopied, fo.DataChecked)
		}
		c := compareSamples(t, py, in, out)
		a, o := c.In[ds], c.Out[ds]
		if a.SHA256 == "" || a.SHA256 != o.SHA256 && !(strings.HasPrefix(a.Dtype, ">") && sameAsLittleEndian(t, py, in, out, ds)) {
			t.Errorf("%s: values differ: input %+v, output %+v", name, a, o)
		}
		if o.Dtype != "<f4" || fmt.Sprint(o.Filters) != "[true gzip true]" || o.Chunks[0] != recfile.DefaultChunkRows {
			t.Errorf("%s: output stored as %+v, want muarc's encoding", name, o)
		}
		if name == "contiguous" && a.Chunks != nil || name == "no-shuffle" && fmt.Sprint(a.Filters) != "[false gzip true]" {
			t.Errorf("%s: fixture stored as %+v", name, a)
		}
	}
}

// sameAsLittleEndian has h5py compare the values of ds in two files as
// little-endian float32 (the bits of a big-endian input differ from the
// output's in tobytes, not in value).
func sameAsLittleEndian(t *testing.T, py, a, b, ds string) bool {
	t.Helper()
	script := `
import sys, h5py, numpy as np
x = h5py.File(sys.argv[1], "r")[sys.argv[3]][()].astype("<f4")
y = h5py.File(sys.argv[2], "r")[sys.argv[3]][()].astype("<f4")
print(x.tobytes() == y.tobytes() and x.size > 0)
`
	out, err := exec.Command(py, "-c", script, a, b, ds).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, out)
	}
	return strings.TrimSpace(string(out)) == "True"
}

// TestDamagedChunkFoundByTheCopy: one flipped byte inside a stored sample
// chunk (its address from h5py's get_chunk_info) is found by the copy's
// Fletcher-32 check and refused with the full integrity report, as the
// source check reports it (naming the chunk); with AcceptDamaged the
// damage is recorded and the read of the damaged chunk still fails the
// file. The source check alone, leaving samples to the write, does not
// read the chunk: the copy is what finds it.
func TestDamagedChunkFoundByTheCopy(t *testing.T) {
	py := needPython(t)
	dir := t.TempDir()
	in := rawCopySource(t, dir)
	script := `
import sys, h5py
with h5py.File(sys.argv[1], "r") as f:
    ci = f["trials/hold/arrays/grid_a/samples"].id.get_chunk_info_by_coord((16384, 8))
print(ci.byte_offset + ci.size // 2)
`
	b, err := exec.Command(py, "-c", script, in).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, b)
	}
	var at int64
	if _, err := fmt.Sscan(string(b), &at); err != nil {
		t.Fatal(err, string(b))
	}
	good := filepath.Join(dir, "good.h5")
	if b, err := os.ReadFile(in); err != nil || os.WriteFile(good, b, 0o644) != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(in, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	one := []byte{0}
	f.ReadAt(one, at)
	one[0] ^= 0x5a
	f.WriteAt(one, at)
	f.Close()

	// The comparison that checks a raw copy sees the flipped byte, and
	// only in the array that holds it.
	ga, gb := openArrays(t, good), openArrays(t, in)
	for i, want := range []bool{false, true} {
		same, ok, err := recfile.SameStoredSamples(ga[i].Samples, gb[i].Samples)
		if same != want || !ok || err != nil {
			t.Fatalf("array %d: same stored chunks %v %v %v, want %v", i, same, ok, err, want)
		}
	}

	vopt := validate.DefaultOptions()
	vopt.SamplesReadByCaller = true
	if d := validate.File(in, vopt).Damage(); len(d) != 0 {
		t.Fatalf("the check leaving samples to the write found %v", d)
	}
	vopt.SamplesReadByCaller = false
	if d := validate.File(in, vopt).Damage(); len(d) != 1 || d[0].Check != "checksum.chunk" {
		t.Fatalf("the full check found %v", d)
	}
	key, _ := KeyFromBytes(make([]byte, 32))
	rep, err := DeidentifyStudy(filepath.Dir(in), filepath.Join(dir, "out"), StudyOptions{Key: key})
	if err != nil {
		t.Fatal(err)
	}
	fo := rep.Files[0]
	const want = "refused: the source fails its integrity checks: checksum.chunk at /trials/hold/arrays/grid_a/samples: chunk at [16384, 8]: Fletcher-32 "
	if rep.Failed != 1 || !strings.HasPrefix(fo.Error, want) || fo.Output != "" || fo.Subject != "" {
		t.Fatalf("damaged chunk: %+v", fo)
	}
	if left, _ := filepath.Glob(filepath.Join(dir, "out", "*")); len(left) != 0 {
		t.Fatalf("left behind: %v", left)
	}
	rep, err = DeidentifyStudy(filepath.Dir(in), filepath.Join(dir, "out2"), StudyOptions{Key: key, AcceptDamaged: true})
	if err != nil {
		t.Fatal(err)
	}
	fo = rep.Files[0]
	if rep.Failed != 1 || !strings.Contains(fo.Error, "/trials/hold/arrays/grid_a/samples: reading samples: ") ||
		!strings.HasSuffix(fo.Error, "read chunk at row 16384 column 8: data error detected by Fletcher32 checksum") ||
		len(fo.Notes) == 0 || !strings.Contains(fo.Notes[len(fo.Notes)-1], "checksum.chunk x1") {
		t.Fatalf("damaged chunk, damage accepted: %+v", fo)
	}
	if left, _ := filepath.Glob(filepath.Join(dir, "out2", "*")); len(left) != 0 {
		t.Fatalf("left behind: %v", left)
	}
}

// openArrays opens a recording for the test's lifetime and returns its
// first trial's arrays.
func openArrays(t *testing.T, path string) []record.Array {
	t.Helper()
	f, err := recfile.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { f.Close() })
	return f.Recording().Trials[0].Arrays
}
