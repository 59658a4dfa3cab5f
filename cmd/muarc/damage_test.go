package main

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"muarc/deid"
	"muarc/h5"
	"muarc/internal/isolate"
	"muarc/internal/reftest"
	"muarc/recfile"
	"muarc/synth"
)

// The damaged-file corpus: copies of a good recording with bytes flipped in
// each kind of HDF5 structure, or cut short. Object header and chunk
// addresses come from h5py (Debian python3-h5py, h5o.get_info and
// get_chunk_info), the other structures from their signatures in the HDF5
// file format specification (version 3.0, section III: "TREE" v1 B-tree
// nodes, "BTHD"/"BTLF" v2 B-trees, "SNOD" symbol table nodes, "HEAP" local
// heaps, "GCOL" global heap collections, "FRHP"/"FHDB" fractal heaps that
// hold dense attribute storage). MUARC_DAMAGE_ALL=1 (make fuzz) takes every
// candidate instead of a spread sample.

func init() {
	// The canonical metadata text of a file, read in a worker process
	// (the file may crash the HDF5 library): the ground truth for "a value
	// changed".
	isolate.Register("test.canonical", func(raw json.RawMessage) (any, error) {
		var p string
		if err := json.Unmarshal(raw, &p); err != nil {
			return nil, err
		}
		objs, err := h5.Metadata(p)
		if err != nil {
			return nil, err
		}
		return string(recfile.CanonicalMetadata(objs)), nil
	})
}

// smallFile writes a small generated recording (one trial, one 4 x 4
// array, 2.4 s at 1024 Hz, with an edited decomposition and MUAPs, so every
// kind of object the layout has is there) and returns its path.
func smallFile(t *testing.T) string {
	t.Helper()
	cfg := synth.TestConfig()
	cfg.LevelsPctMVC = []float64{30}
	cfg.RestS, cfg.RampS, cfg.PlateauS = 0.2, 0.5, 1
	cfg.UnitsPerMuscle = 6
	cfg.Arrays = cfg.Arrays[:1]
	gens, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "small.h5")
	if err := recfile.Write(path, gens[0].Recording, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	return path
}

type damageCase struct {
	name  string // class-offset, the file name
	class string
	bytes []byte
}

// structureAddrs asks h5py for the object header address of every object
// and the address and size of every stored chunk.
func structureAddrs(t *testing.T, path string) (headers []int64, chunks [][2]int64) {
	py := reftest.NeedPython(t, "h5py")
	prog := `import sys, json, h5py
f = h5py.File(sys.argv[1], "r")
hdr, ch = [h5py.h5o.get_info(f.id).addr], []
def visit(name, obj):
    hdr.append(h5py.h5o.get_info(obj.id).addr)
    if isinstance(obj, h5py.Dataset) and obj.chunks:
        for i in range(obj.id.get_num_chunks()):
            c = obj.id.get_chunk_info(i)
            ch.append([c.byte_offset, c.size])
f.visititems(visit)
print(json.dumps([hdr, ch]))
`
	out, err := exec.Command(py, "-c", prog, path).Output()
	if err != nil {
		t.Fatalf("h5py: %v", err)
	}
	var v struct {
		H []int64
		C [][2]int64
	}
	var raw [2]json.RawMessage
	if err := json.Unmarshal(out, &raw); err != nil {
		t.Fatal(err)
	}
	json.Unmarshal(raw[0], &v.H)
	json.Unmarshal(raw[1], &v.C)
	return v.H, v.C
}

// spread keeps n of xs, evenly spaced (all of them with MUARC_DAMAGE_ALL).
func spread[T any](xs []T, n int) []T {
	if os.Getenv("MUARC_DAMAGE_ALL") != "" || len(xs) <= n {
		return xs
	}
	out := make([]T, 0, n)
	for i := 0; i < n; i++ {
		out = append(out, xs[i*len(xs)/n])
	}
	return out
}

// damagedCorpus makes the damaged copies of good.
func damagedCorpus(t *testing.T, good []byte, path string) []damageCase {
	headers, chunks := structureAddrs(t, path)
	flip := func(class string, off int64, mask byte) (damageCase, bool) {
		if off < 0 || off >= int64(len(good)) {
			return damageCase{}, false
		}
		b := append([]byte(nil), good...)
		b[off] ^= mask
		return damageCase{fmt.Sprintf("%s-%d", class, off), class, b}, true
	}
	var out []damageCase
	add := func(class string, offs []int64, mask byte, n int) {
		sort.Slice(offs, func(i, j int) bool { return offs[i] < offs[j] })
		for _, o := range spread(offs, n) {
			if c, ok := flip(class, o, mask); ok {
				out = append(out, c)
			}
		}
	}
	var offs []int64
	for o := int64(0); o < 96; o += 2 {
		offs = append(offs, o)
	}
	add("superblock", offs, 0xff, 8)
	offs = nil
	for _, h := range headers {
		for _, d := range []int64{0, 1, 2, 4, 8, 12, 16, 20, 24, 28, 40, 56} {
			offs = append(offs, h+d)
		}
	}
	add("objheader", offs, 0xff, 20)
	sigOffsets := func(sigs []string, deltas []int64) []int64 {
		var o []int64
		for _, s := range sigs {
			for i := 0; ; {
				k := bytes.Index(good[i:], []byte(s))
				if k < 0 {
					break
				}
				for _, d := range deltas {
					o = append(o, int64(i+k)+d)
				}
				i += k + 4
			}
		}
		return o
	}
	add("btree", sigOffsets([]string{"TREE", "BTHD", "BTLF", "SNOD", "HEAP"}, []int64{0, 4, 5, 6, 8, 12, 16, 24, 32, 48}), 0xff, 20)
	add("denseattr", sigOffsets([]string{"FRHP", "FHDB"}, []int64{0, 4, 5, 8, 12, 20, 30, 40, 60, 90}), 0xff, 12)
	// Global heap: every byte of the objects of each collection (its size
	// is the 8 bytes after the signature, version and reserved bytes);
	// flipping the lowest bit turns a character into a neighbour ("e10"
	// into "e11"), damage that reads without an error.
	offs = nil
	for i := 0; ; {
		k := bytes.Index(good[i:], []byte("GCOL"))
		if k < 0 {
			break
		}
		p := int64(i + k)
		size := int64(binary.LittleEndian.Uint64(good[p+8:]))
		for o := p + 16; o < p+size && o < int64(len(good)); o++ {
			offs = append(offs, o)
		}
		i += k + 4
	}
	add("globalheap", offs, 0x01, 40)
	offs = nil
	for _, c := range chunks {
		offs = append(offs, c[0]+c[1]/2)
	}
	add("chunk", offs, 0xff, 8)
	for _, frac := range []float64{0.05, 0.2, 0.4, 0.6, 0.8, 0.95, 0.999} {
		n := int(frac * float64(len(good)))
		out = append(out, damageCase{fmt.Sprintf("truncated-%d", n), "truncated", good[:n]})
	}
	return out
}

// noCrashDump fails when a command's stderr holds a Go crash dump.
func noCrashDump(t *testing.T, what, stderr string) {
	t.Helper()
	if strings.Contains(stderr, "goroutine ") || strings.Contains(stderr, "signal arrived") || strings.Contains(stderr, "SIGSEGV:") {
		t.Fatalf("%s crashed:\n%.1500s", what, stderr)
	}
}

// TestDamagedCorpus runs validate, index and deidentify over the whole
// corpus at once: nothing crashes, every file is accounted for, every
// damage that changes a metadata value is found, and deidentify writes no
// output from a damaged source (each output it does write carries the same
// data and metadata as the output of the pristine file).
func TestDamagedCorpus(t *testing.T) {
	goodPath := smallFile(t)
	good, err := os.ReadFile(goodPath)
	if err != nil {
		t.Fatal(err)
	}
	cases := damagedCorpus(t, good, goodPath)
	dir := t.TempDir()
	corpus := filepath.Join(dir, "corpus")
	os.MkdirAll(corpus, 0o755)
	classes := map[string]int{}
	for _, c := range cases {
		classes[c.class]++
		if err := os.WriteFile(filepath.Join(corpus, c.name+".h5"), c.bytes, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	t.Logf("%d damaged files: %v", len(cases), classes)
	for _, cl := range []string{"superblock", "objheader", "btree", "denseattr", "globalheap", "chunk", "truncated"} {
		if classes[cl] == 0 {
			t.Fatalf("no case of class %s", cl)
		}
	}

	// Ground truth: the canonical metadata of each file, read in workers.
	pool, err := isolate.NewPool(0)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	var pristine string
	if err := pool.Call("test.canonical", goodPath, &pristine); err != nil {
		t.Fatal(err)
	}

	// validate over the whole corpus.
	stdout, stderr, code := runMuarc(t, dir, "validate", "--json", corpus)
	noCrashDump(t, "validate", stderr)
	if code != 1 && code != 2 {
		t.Fatalf("validate: exit %d", code)
	}
	var vr struct {
		Files []struct {
			File      string `json:"file"`
			ReadError string `json:"read_error"`
			Errors    int    `json:"errors"`
			Findings  []struct {
				Check string `json:"check"`
			} `json:"findings"`
		} `json:"files"`
	}
	if err := json.Unmarshal([]byte(stdout), &vr); err != nil || len(vr.Files) != len(cases) {
		t.Fatalf("validate --json: %v, %d reports for %d files", err, len(vr.Files), len(cases))
	}
	flagged := map[string]bool{}
	changed, caught, crashed := 0, 0, 0
	for _, f := range vr.Files {
		name := strings.TrimSuffix(filepath.Base(f.File), ".h5")
		bad := f.ReadError != "" || f.Errors > 0
		flagged[name] = bad
		if strings.Contains(f.ReadError, "crashed") {
			crashed++
		}
		var canon string
		if err := pool.Call("test.canonical", f.File, &canon); err != nil || canon == pristine {
			continue // unreadable (then validate must say so: below) or unchanged
		}
		changed++
		if !bad {
			t.Errorf("%s: a metadata value changed but validate reports the file clean", name)
			continue
		}
		caught++
	}
	for _, c := range cases {
		if c.class == "chunk" || c.class == "truncated" {
			if !flagged[c.name] {
				t.Errorf("%s: damaged chunk or truncated file reported clean", c.name)
			}
		}
	}
	t.Logf("validate: %d files with changed metadata values, %d caught; %d crashed the HDF5 library in a worker", changed, caught, crashed)
	if changed == 0 {
		t.Fatal("no case changed a metadata value: the corpus does not test the digest")
	}

	// index: every file is a row or named as unreadable.
	stdout, stderr, code = runMuarc(t, dir, "index", "--json", corpus)
	noCrashDump(t, "index", stderr)
	var ir struct {
		Rows []struct {
			File string `json:"file"`
		} `json:"rows"`
		Unreadable []string `json:"unreadable"`
	}
	if err := json.Unmarshal([]byte(stdout), &ir); err != nil {
		t.Fatalf("index --json: %v\n%.500s", err, stdout)
	}
	seen := map[string]bool{}
	for _, r := range ir.Rows {
		seen[strings.TrimSuffix(r.File, ".h5")] = true
	}
	for _, u := range ir.Unreadable {
		n, _, _ := strings.Cut(u, ".h5")
		seen[n] = true
	}
	for _, c := range cases {
		if !seen[c.name] {
			t.Errorf("index: %s neither listed nor named unreadable", c.name)
		}
	}
	if len(ir.Unreadable) > 0 && code != 2 {
		t.Errorf("index: %d unreadable, exit %d, want 2", len(ir.Unreadable), code)
	}

	// deidentify: the pristine file's output is the reference.
	key := filepath.Join(dir, "study.key")
	if _, stderr, code := runMuarc(t, dir, "key", "new", key); code != 0 {
		t.Fatalf("key new: %s", stderr)
	}
	refDir := filepath.Join(dir, "ref-in")
	os.MkdirAll(refDir, 0o755)
	os.WriteFile(filepath.Join(refDir, "good.h5"), good, 0o644)
	if _, stderr, code := runMuarc(t, dir, "deidentify", refDir, "-o", filepath.Join(dir, "ref-out"), "--key", key); code != 0 {
		t.Fatalf("deidentify the good file: exit %d %s", code, stderr)
	}
	refOut, _ := filepath.Glob(filepath.Join(dir, "ref-out", "*.h5"))
	if len(refOut) != 1 {
		t.Fatalf("reference output: %v", refOut)
	}
	refData, refMeta := outputContent(t, refOut[0])

	out := filepath.Join(dir, "shared")
	stdout, stderr, code = runMuarc(t, dir, "deidentify", corpus, "-o", out, "--key", key, "--json")
	noCrashDump(t, "deidentify", stderr)
	var dr deid.StudyReport
	if err := json.Unmarshal([]byte(stdout), &dr); err != nil || len(dr.Files) != len(cases) {
		t.Fatalf("deidentify --json: %v (%d files) exit %d\n%.500s", err, len(dr.Files), code, stderr)
	}
	written := 0
	for _, f := range dr.Files {
		name := strings.TrimSuffix(f.Input, ".h5")
		if f.Error != "" {
			if !flagged[name] {
				t.Errorf("%s: deidentify failed (%s) but validate found nothing", name, f.Error)
			}
			continue
		}
		written++
		if flagged[name] {
			t.Errorf("%s: validate reports damage but deidentify wrote %s", name, f.Output)
		}
		data, meta := outputContent(t, filepath.Join(out, f.Output))
		if data != refData || meta != refMeta {
			t.Errorf("%s: de-identified output differs from the pristine file's output (laundered damage)", name)
		}
	}
	if dr.Failed > 0 && code != 1 {
		t.Errorf("deidentify: %d failed, exit %d, want 1", dr.Failed, code)
	}
	t.Logf("deidentify: %d written (damage in unused bytes), %d refused", written, dr.Failed)
}

// outputContent is a written output's data digests and its metadata view
// without the times that differ between runs, as JSON.
func outputContent(t *testing.T, path string) (string, string) {
	t.Helper()
	f, err := recfile.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d, err := deid.DataDigests(f.Recording())
	if err != nil {
		t.Fatal(err)
	}
	view, err := recfile.MetadataView(path)
	if err != nil {
		t.Fatal(err)
	}
	delete(view, "created")
	delete(view, recfile.AttrMetadataSHA256)
	if p, ok := view["provenance"].(map[string]any); ok {
		if h, ok := p["history"].([]any); ok {
			for _, r := range h {
				delete(r.(map[string]any), "time")
			}
		}
	}
	db, _ := json.Marshal(d)
	vb, _ := json.Marshal(view)
	return string(db), string(vb)
}

// TestOneDamagedFileAmongGood: for every command that opens recordings, a
// folder (or a run per file, for the one-file commands) with a damaged
// file between two good ones: the good ones are processed, the damaged one
// is named with the reason, the exit status says so, and nothing crashes.
// The damaged file is one that crashes the HDF5 library when read in the
// same process, the hardest case.
func TestOneDamagedFileAmongGood(t *testing.T) {
	good := smallFile(t)
	bad, crashed := crashingCopy(t, good)
	if !crashed {
		t.Fatal("no damage found that crashes the HDF5 library: the test would prove nothing")
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "study")
	os.MkdirAll(in, 0o755)
	gb, _ := os.ReadFile(good)
	bb, _ := os.ReadFile(bad)
	for n, b := range map[string][]byte{"a.h5": gb, "b.h5": bb, "c.h5": gb} {
		os.WriteFile(filepath.Join(in, n), b, 0o644)
	}
	key := filepath.Join(dir, "k")
	runMuarc(t, dir, "key", "new", key)
	named := func(what, out string) {
		t.Helper()
		if !strings.Contains(out, "b.h5") || !strings.Contains(out, "crashed") {
			t.Errorf("%s: the damaged file is not named with the reason:\n%.1500s", what, out)
		}
	}

	stdout, stderr, code := runMuarc(t, dir, "validate", in)
	noCrashDump(t, "validate", stderr)
	named("validate", stdout)
	if code != 2 || strings.Count(stdout, "unreadable") != 2 { // b's row and the total line
		t.Errorf("validate: exit %d\n%s", code, stdout)
	}

	stdout, stderr, code = runMuarc(t, dir, "index", in)
	noCrashDump(t, "index", stderr)
	named("index", stderr)
	if code != 2 || !strings.Contains(stdout, "a.h5") || !strings.Contains(stdout, "c.h5") {
		t.Errorf("index: exit %d\n%s", code, stdout)
	}

	stdout, stderr, code = runMuarc(t, dir, "deidentify", in, "-o", filepath.Join(dir, "shared"), "--key", key)
	noCrashDump(t, "deidentify", stderr)
	named("deidentify", stdout)
	outs, _ := filepath.Glob(filepath.Join(dir, "shared", "*.h5"))
	if code != 1 || len(outs) != 2 || !strings.Contains(stdout, "2 of 3") {
		t.Errorf("deidentify: exit %d, outputs %v\n%s", code, outs, stdout)
	}

	page := filepath.Join(dir, "report.html")
	stdout, stderr, code = runMuarc(t, dir, "report", in, "-o", page)
	noCrashDump(t, "report", stderr)
	html, _ := os.ReadFile(page)
	named("report page", string(html))
	if code != 2 || !strings.Contains(stdout, "a.h5: valid") || !strings.Contains(stdout, "c.h5: valid") || !strings.Contains(stdout, "b.h5: could not read") {
		t.Errorf("report: exit %d\n%s", code, stdout)
	}

	stdout, stderr, code = runMuarc(t, dir, "pack", in, "-o", filepath.Join(dir, "deposit"), "--allow-identified")
	noCrashDump(t, "pack", stderr)
	named("pack", stdout+stderr)
	if code != 1 {
		t.Errorf("pack: exit %d\n%s\n%s", code, stdout, stderr)
	}

	for _, c := range [][]string{
		{"inspect"}, {"stats", "--no-muaps"}, {"stats"}, {"plot", "-o", filepath.Join(dir, "plots")}, {"export", "-o", filepath.Join(dir, "exp")},
	} {
		for _, f := range []string{"a.h5", "b.h5", "c.h5"} {
			args := append(append([]string(nil), c...), filepath.Join(in, f))
			if c[0] == "export" || c[0] == "plot" {
				args[2] += "-" + f
			}
			stdout, stderr, code := runMuarc(t, dir, args...)
			noCrashDump(t, c[0], stderr)
			if f == "b.h5" {
				named(c[0], stderr)
				if code != 2 {
					t.Errorf("%s b.h5: exit %d", c[0], code)
				}
			} else if code != 0 {
				t.Errorf("%s %s: exit %d\n%.500s\n%.500s", c[0], f, code, stdout, stderr)
			}
		}
	}
	ref := func(f string) string { return filepath.Join(in, f) + "#ramp_30pct/ta_grid/auto" }
	stdout, stderr, code = runMuarc(t, dir, "compare", ref("a.h5"), ref("c.h5"))
	if code != 0 {
		t.Errorf("compare good files: exit %d %s %s", code, stdout, stderr)
	}
	_, stderr, code = runMuarc(t, dir, "compare", ref("a.h5"), ref("b.h5"))
	noCrashDump(t, "compare", stderr)
	named("compare", stderr)
	if code != 2 {
		t.Errorf("compare with the damaged file: exit %d", code)
	}

	// verify: a deposit of the good files, one then replaced by the
	// damaged bytes.
	good2 := filepath.Join(dir, "good")
	os.MkdirAll(good2, 0o755)
	os.WriteFile(filepath.Join(good2, "a.h5"), gb, 0o644)
	os.WriteFile(filepath.Join(good2, "c.h5"), gb, 0o644)
	dep := filepath.Join(dir, "dep2")
	if _, stderr, code := runMuarc(t, dir, "pack", good2, "-o", dep, "--allow-identified"); code != 0 {
		t.Fatalf("pack good: %d %s", code, stderr)
	}
	var target string
	filepath.Walk(dep, func(p string, fi os.FileInfo, err error) error {
		if err == nil && filepath.Base(p) == "c.h5" {
			target = p
		}
		return nil
	})
	os.WriteFile(target, bb, 0o644)
	stdout, stderr, code = runMuarc(t, dir, "verify", dep)
	noCrashDump(t, "verify", stderr)
	if code != 1 || !strings.Contains(stdout+stderr, "c.h5") || !strings.Contains(stdout+stderr, "crashed") {
		t.Errorf("verify: exit %d\n%.1500s\n%.500s", code, stdout, stderr)
	}
}

// heapValueChange flips bits in the global heap of good until validate
// reports integrity.metadata_digest and nothing unreadable: a string
// changed (a label, a unit, the contact) without any read error.
func heapValueChange(t *testing.T, good string) string {
	t.Helper()
	b, _ := os.ReadFile(good)
	at := bytes.Index(b, []byte("GCOL"))
	bad := filepath.Join(t.TempDir(), "changed.h5")
	for off := at + 40; off < len(b) && off < at+4000; off += 7 {
		c := append([]byte(nil), b...)
		c[off] ^= 0x01
		os.WriteFile(bad, c, 0o644)
		stdout, _, code := runMuarc(t, ".", "validate", "--json", bad)
		if code == 1 && strings.Contains(stdout, `"integrity.metadata_digest"`) && !strings.Contains(stdout, `"read_error"`) {
			return bad
		}
	}
	t.Fatal("no heap damage that changes a value found")
	return ""
}

// TestDeidentifyRefusesDamagedSource: a source whose strings changed is
// refused with the check that found it; --accept-damaged writes it and
// records the damage in the output's history.
func TestDeidentifyRefusesDamagedSource(t *testing.T) {
	bad := heapValueChange(t, smallFile(t))
	dir := t.TempDir()
	key := filepath.Join(dir, "k")
	runMuarc(t, dir, "key", "new", key)
	out := filepath.Join(dir, "shared.h5")
	stdout, stderr, code := runMuarc(t, dir, "deidentify", bad, "-o", out, "--key", key)
	if code != 1 || !strings.Contains(stdout, "integrity.metadata_digest") || !strings.Contains(stdout, "--accept-damaged") {
		t.Fatalf("deidentify of a damaged source: exit %d\n%s\n%s", code, stdout, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Fatal("an output was written from a damaged source")
	}
	stdout, stderr, code = runMuarc(t, dir, "deidentify", bad, "-o", out, "--key", key, "--accept-damaged")
	if code != 0 || !strings.Contains(stdout, "integrity.metadata_digest x1") {
		t.Fatalf("with --accept-damaged: exit %d\n%s\n%s", code, stdout, stderr)
	}
	f, err := recfile.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	h := f.Recording().Provenance.History
	last := h[len(h)-1]
	if last.Action != "deidentify" || !strings.Contains(last.Details, `"source_damage_accepted":{"integrity.metadata_digest":1}`) {
		t.Fatalf("history does not record the accepted damage: %+v", last)
	}
	// The output itself is sound: a fresh digest over what was written.
	if _, _, code := runMuarc(t, dir, "validate", out); code != 0 {
		t.Fatalf("the output does not validate: exit %d", code)
	}
}

// TestPackRefusesDamagedRecording: pack refuses a recording whose strings
// changed, naming the check; --accept-damaged packs it and bag-info.txt
// says so.
func TestPackRefusesDamagedRecording(t *testing.T) {
	bad := heapValueChange(t, smallFile(t))
	dir := t.TempDir()
	in := filepath.Join(dir, "study")
	os.MkdirAll(in, 0o755)
	b, _ := os.ReadFile(bad)
	os.WriteFile(filepath.Join(in, "rec.h5"), b, 0o644)
	dep := filepath.Join(dir, "deposit")
	stdout, stderr, code := runMuarc(t, dir, "pack", in, "-o", dep, "--allow-identified")
	if code != 1 || !strings.Contains(stdout+stderr, "integrity.metadata_digest") || !strings.Contains(stdout+stderr, "--accept-damaged") {
		t.Fatalf("pack of a damaged recording: exit %d\n%s\n%s", code, stdout, stderr)
	}
	if _, err := os.Stat(dep); err == nil {
		t.Fatal("a deposit was written")
	}
	stdout, stderr, code = runMuarc(t, dir, "pack", in, "-o", dep, "--allow-identified", "--accept-damaged")
	if code != 0 {
		t.Fatalf("pack --accept-damaged: exit %d\n%s\n%s", code, stdout, stderr)
	}
	info, _ := os.ReadFile(filepath.Join(dep, "bag-info.txt"))
	if !strings.Contains(string(info), "Accepted-Damage: rec.h5 fails its integrity checks") || !strings.Contains(string(info), "integrity.metadata_digest") {
		t.Fatalf("bag-info.txt does not name the damage:\n%s", info)
	}
	// verify cites the acceptance: the recording's findings are reported
	// as accepted at packing and do not fail the deposit while its bytes
	// match the manifest.
	stdout, stderr, code = runMuarc(t, dir, "verify", dep)
	if code != 0 || !strings.Contains(stdout, "(accepted at packing: bag-info.txt Accepted-Damage)") ||
		!strings.Contains(stdout, ": OK, 1 finding on damage accepted at packing") {
		t.Fatalf("verify of an accepted-damage deposit: exit %d\n%s\n%s", code, stdout, stderr)
	}
	// A byte changed after packing is new damage: the manifest check names
	// the file and the acceptance no longer covers it.
	rec := filepath.Join(dep, "data", "recordings", "rec.h5")
	b, _ = os.ReadFile(rec)
	b[len(b)/2] ^= 0xff
	os.WriteFile(rec, b, 0o644)
	stdout, stderr, code = runMuarc(t, dir, "verify", dep)
	if code != 1 || strings.Contains(stdout, "accepted at packing") {
		t.Fatalf("verify after a later change: exit %d\n%s\n%s", code, stdout, stderr)
	}
}

// TestStuckReadIsStopped: a worker read that does not finish within the
// time limit (MUARC_WORKER_TIME_LIMIT; here far too short for any read, as
// if the library looped on the file) is stopped and reported for its file,
// naming the limit and how to raise it; the batch goes on to the next file
// and nothing is opened in the command's own process.
func TestStuckReadIsStopped(t *testing.T) {
	a := smallFile(t)
	dir := t.TempDir()
	b := filepath.Join(dir, "second.h5")
	data, _ := os.ReadFile(a)
	os.WriteFile(b, data, 0o644)
	t.Setenv("MUARC_WORKER_TIME_LIMIT", "1ms")
	stdout, stderr, code := runMuarc(t, dir, "validate", a, b)
	out := stdout + stderr
	if code == 0 || strings.Count(out, "did not finish within 1ms") < 2 || !strings.Contains(out, "MUARC_WORKER_TIME_LIMIT") {
		t.Fatalf("validate with a 1ms worker limit: exit %d\n%s\n%s", code, stdout, stderr)
	}
	t.Setenv("MUARC_WORKER_TIME_LIMIT", "soon")
	stdout, stderr, code = runMuarc(t, dir, "validate", a)
	if code != 2 || !strings.Contains(stdout+stderr, `MUARC_WORKER_TIME_LIMIT="soon"`) {
		t.Fatalf("a bad limit must be refused naming the variable: exit %d\n%s\n%s", code, stdout, stderr)
	}
}
