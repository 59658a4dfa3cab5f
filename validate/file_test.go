package validate

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"muarc/internal/reftest"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"testing"

	"muarc/recfile"
	"muarc/record"
)

// python3 is the system interpreter with Debian's python3-h5py (the pyenv
// python3 first on PATH lacks the system packages).
const python3 = "/usr/bin/python3"

// needH5py skips, or fails under CI, when h5py is missing.
func needH5py(t testing.TB) { reftest.NeedPython(t, "h5py") }

// h5pyEdits runs Python snippets with h5py (Debian python3-h5py, a
// general-purpose HDF5 tool outside muarc), each on its own file opened
// read-write as f, in one interpreter; they make the structural breaks
// muarc's own writer refuses to make. In a snippet, A is the array group
// /trials/ramp_10/arrays/grid_a, D its decomposition auto, and rewrite(g,
// name, data, **kw) replaces a dataset keeping its attributes. It returns
// what each snippet prints.
func h5pyEdits(t *testing.T, paths, snippets []string) []string {
	t.Helper()
	needH5py(t)
	var prog strings.Builder
	prog.WriteString(`import sys, io, json, contextlib, h5py, numpy as np
def rewrite(g, name, data, **kw):
    attrs = dict(g[name].attrs)
    del g[name]
    d = g.create_dataset(name, data=data, **kw)
    for k, v in attrs.items(): d.attrs[k] = v
jobs = json.load(sys.stdin)
outs = []
for path, snippet in jobs:
    f = h5py.File(path, 'r+')
    env = {"f": f, "A": f['/trials/ramp_10/arrays/grid_a'], "np": np, "rewrite": rewrite}
    env["D"] = env["A"]['decompositions/auto']
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        exec(snippet, env)
    f.close()
    outs.append(buf.getvalue().strip())
print(json.dumps(outs))
`)
	jobs := make([][2]string, len(paths))
	for i := range paths {
		jobs[i] = [2]string{paths[i], snippets[i]}
	}
	in, _ := json.Marshal(jobs)
	cmd := exec.Command(python3, "-c", prog.String())
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("h5py edits failed: %v\n%s", err, stderr.String())
	}
	var outs []string
	if err := json.Unmarshal(out, &outs); err != nil || len(outs) != len(paths) {
		t.Fatalf("h5py edits output %q: %v", out, err)
	}
	return outs
}

// writeRecording writes goodRecording, changed by brk, to dir/name.h5.
func writeRecording(t testing.TB, dir, name string, brk func(*record.Recording)) (string, error) {
	t.Helper()
	rec := goodRecording()
	if brk != nil {
		brk(rec)
	}
	p := filepath.Join(dir, name+".h5")
	return p, recfile.Write(p, rec, recfile.WriteOptions{})
}

func checksOf(fs []Finding, min Severity) []string {
	var out []string
	for _, f := range fs {
		if f.Severity >= min {
			out = append(out, f.Check)
		}
	}
	sort.Strings(out)
	return out
}

func TestGoodFileIsClean(t *testing.T) {
	p, err := writeRecording(t, t.TempDir(), "good", nil)
	if err != nil {
		t.Fatal(err)
	}
	r := File(p, DefaultOptions())
	if r.ReadError != "" || len(r.Findings) != 0 {
		t.Fatalf("good file: read error %q, findings %v", r.ReadError, r.Findings)
	}
	// Strict changes nothing on a clean file.
	opt := DefaultOptions()
	opt.Strict = true
	if r := File(p, opt); r.Failed() || len(r.Findings) != 0 {
		t.Fatalf("strict: %+v", r)
	}
}

// TestModelBreaksInFiles writes each one-rule break of contentBreaks with
// recfile.Write and validates the file: the same finding, with its HDF5
// path, and no other error. The breaks the writer refuses are listed.
func TestModelBreaksInFiles(t *testing.T) {
	refused := map[string]bool{"channel table short": true, "two trials one name": true, "extra column short": true, "MUAPs for too few units": true}
	dir := t.TempDir()
	for i, c := range contentBreaks {
		t.Run(c.name, func(t *testing.T) {
			p, err := writeRecording(t, dir, "b"+strconv.Itoa(i), c.brk)
			if refused[c.name] {
				if !errors.Is(err, recfile.ErrInvalid) {
					t.Fatalf("writer accepted a break it should refuse (err %v)", err)
				}
				return
			}
			if err != nil {
				t.Fatalf("write: %v", err)
			}
			opt := DefaultOptions()
			if c.check == "discharge.rate_high" {
				opt.Rules.Disabled = []string{"discharge.doublet"}
			}
			r := File(p, opt)
			if r.ReadError != "" {
				t.Fatalf("read error: %s", r.ReadError)
			}
			var hit *Finding
			for k := range r.Findings {
				if r.Findings[k].Check == c.check {
					hit = &r.Findings[k]
				}
			}
			if hit == nil || hit.Severity != c.sev || hit.JSONPath != c.path || !strings.HasPrefix(hit.HDF5Path, "/trials/ramp_10") {
				t.Fatalf("want %s %s at %s; got %v", c.sev, c.check, c.path, r.Findings)
			}
			if len(r.Findings) != 1 {
				t.Fatalf("want only %s, got %v", c.check, r.Findings)
			}
		})
	}
}

// structuralBreaks are made with h5py on a good file; each breaks one rule
// of the layout. want are the checks that must be reported (at severity
// Error unless a read error is expected); no other error or warning may be.
var structuralBreaks = []struct {
	name    string
	snippet string
	want    []string
	readErr string // substring of Report.ReadError, when the file is refused
}{
	{"session group missing", "del f['session']", []string{"structure.missing"}, ""},
	{"list_position off", "A.attrs['list_position'] = np.int64(3)", []string{"structure.list_position"}, ""},
	{"list_position missing", "del D.attrs['list_position']", []string{"structure.list_position"}, ""},
	{"samples missing", "del A['samples']", []string{"structure.missing"}, ""},
	{"samples contiguous", "rewrite(A, 'samples', A['samples'][...])", []string{"structure.chunked", "structure.fletcher32"}, ""},
	{"samples without Fletcher-32", "rewrite(A, 'samples', A['samples'][...], chunks=(512, 8), shuffle=True, compression='gzip')", []string{"structure.fletcher32"}, ""},
	{"samples as int16 without a scale", "rewrite(A, 'samples', A['samples'][...].astype('int16'), chunks=(512, 8), fletcher32=True)", []string{"samples.scale"}, ""},
	{"samples as int16 with a scale of 0", "rewrite(A, 'samples', A['samples'][...].astype('int16'), chunks=(512, 8), fletcher32=True); A['samples'].attrs['scale_factor'] = 0.0; A['samples'].attrs['add_offset'] = 0.0", []string{"samples.scale"}, ""},
	{"samples as uint16", "rewrite(A, 'samples', A['samples'][...].astype('uint16'), chunks=(512, 8), fletcher32=True)", []string{"structure.type"}, ""},
	{"samples with units other than the array's", "rewrite(A, 'samples', A['samples'][...].astype('int16'), chunks=(512, 8), fletcher32=True); A['samples'].attrs['scale_factor'] = 0.5; A['samples'].attrs['add_offset'] = 0.0; A['samples'].attrs['units'] = 'mV'", []string{"samples.scale"}, ""},
	{"samples 1-D", "rewrite(A, 'samples', A['samples'][:, 0], chunks=(512,), fletcher32=True)", []string{"structure.shape"}, ""},
	{"channel label column missing", "del A['channels/label']", []string{"structure.missing"}, ""},
	{"channel row column short", "rewrite(A['channels'], 'row', A['channels/row'][:7])", []string{"channels.count"}, ""},
	{"channel x as text", "rewrite(A['channels'], 'x_mm', np.array([b'a'] * 8))", []string{"structure.type"}, ""},
	{"offsets start at 1", "o = D['discharge_offsets'][...]; o[0] = 1; D['discharge_offsets'][...] = o", []string{"offsets.start"}, ""},
	{"offsets decrease", "o = D['discharge_offsets'][...]; o[1], o[2] = o[2], o[1]; D['discharge_offsets'][...] = o", []string{"offsets.order"}, ""},
	{"offsets end short", "o = D['discharge_offsets'][...]; o[-1] -= 1; D['discharge_offsets'][...] = o", []string{"offsets.end"}, ""},
	{"offsets one short", "rewrite(D, 'discharge_offsets', D['discharge_offsets'][:-1])", []string{"offsets.length"}, ""},
	{"discharges as float", "rewrite(D, 'discharges', D['discharges'][...].astype('float64'))", []string{"structure.type"}, ""},
	{"discharges missing", "del D['discharges']", []string{"structure.missing"}, ""},
	{"unit ids repeat", "i = D['units/id'][...]; i[2] = i[0]; D['units/id'][...] = i", []string{"units.id_unique"}, ""},
	{"discharge count wrong", "c = D['units/discharge_count'][...]; c[1] += 1; D['units/discharge_count'][...] = c", []string{"units.discharge_count"}, ""},
	{"silhouette column short", "rewrite(D['units'], 'silhouette', D['units/silhouette'][:2])", []string{"units.column_length"}, ""},
	{"array rate attribute missing", "del A.attrs['sampling_rate_hz']", []string{"structure.missing"}, ""},
	{"force rate attribute missing", "del f['/trials/ramp_10/force'].attrs['sampling_rate_hz']", []string{"structure.missing"}, ""},
	{"side outside the enum", "A.attrs['side'] = 'up'", []string{"metadata.enum"}, ""},
	{"rows as text", "A.attrs['rows'] = '4'", []string{"metadata.invalid_type"}, ""},
	{"layout version missing", "del f.attrs['layout_version']", []string{"layout.version"}, ""},
	{"layout version malformed", "f.attrs['layout_version'] = 'one'", []string{"layout.version"}, ""},
	{"newer major layout", "f.attrs['layout_version'] = '2.0'", []string{"layout.version"}, "newer"},
	{"not a muarc file", "f.attrs['layout'] = 'other-layout'", []string{"layout.name"}, "not a muarc recording"},
	{"samples chunk damaged", "i = A['samples'].id.get_chunk_info(0); print(i.byte_offset + i.size // 2)", []string{"checksum.chunk"}, ""},
}

func TestStructuralBreaks(t *testing.T) {
	needH5py(t)
	dir := t.TempDir()
	paths := make([]string, len(structuralBreaks))
	snippets := make([]string, len(structuralBreaks))
	for i, c := range structuralBreaks {
		p, err := writeRecording(t, dir, "s"+strconv.Itoa(i), nil)
		if err != nil {
			t.Fatal(err)
		}
		paths[i], snippets[i] = p, c.snippet
	}
	outs := h5pyEdits(t, paths, snippets)
	for i, c := range structuralBreaks {
		t.Run(c.name, func(t *testing.T) {
			p := paths[i]
			if c.want[0] == "checksum.chunk" {
				flipByte(t, p, outs[i])
			}
			r := File(p, DefaultOptions())
			if c.readErr != "" {
				if !strings.Contains(r.ReadError, c.readErr) {
					t.Fatalf("read error %q, want one with %q", r.ReadError, c.readErr)
				}
			} else if r.ReadError != "" {
				t.Fatalf("unexpected read error %q", r.ReadError)
			}
			got := checksOf(r.Findings, Warning)
			// An edit of attributes, strings or the object tree also breaks
			// the metadata digest (since layout 1.1); that finding is
			// tested on its own (integrity_test.go) and left out here.
			got = slices.DeleteFunc(got, func(s string) bool { return s == "integrity.metadata_digest" })
			want := append([]string(nil), c.want...)
			sort.Strings(want)
			if strings.Join(dedup(got), " ") != strings.Join(want, " ") {
				t.Fatalf("got errors/warnings %v, want %v\n%v", got, want, r.Findings)
			}
			for _, f := range r.Findings {
				if f.Severity >= Warning && (f.HDF5Path == "" || f.Message == "" || f.Hint == "") {
					t.Fatalf("finding lacks where, what or hint: %+v", f)
				}
			}
		})
	}
}

func dedup(xs []string) []string {
	var out []string
	for i, x := range xs {
		if i == 0 || x != xs[i-1] {
			out = append(out, x)
		}
	}
	return out
}

// flipByte inverts the byte at the decimal offset off of the file.
func flipByte(t *testing.T, path, off string) {
	t.Helper()
	n, err := strconv.ParseInt(off, 10, 64)
	if err != nil {
		t.Fatalf("offset %q: %v", off, err)
	}
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	b := make([]byte, 1)
	if _, err := f.ReadAt(b, n); err != nil {
		t.Fatal(err)
	}
	b[0] ^= 0xff
	if _, err := f.WriteAt(b, n); err != nil {
		t.Fatal(err)
	}
}

func TestUnreadableInputs(t *testing.T) {
	dir := t.TempDir()
	text := filepath.Join(dir, "notes.h5")
	os.WriteFile(text, []byte("not an HDF5 file\n"), 0o644)
	for _, p := range []string{filepath.Join(dir, "missing.h5"), text, dir} {
		r := File(p, DefaultOptions())
		if r.ReadError == "" || !r.Failed() {
			t.Errorf("%s: no read error: %+v", p, r)
		}
	}
}

func TestFilesParallelKeepsOrder(t *testing.T) {
	dir := t.TempDir()
	good, err := writeRecording(t, dir, "good", nil)
	if err != nil {
		t.Fatal(err)
	}
	bad, err := writeRecording(t, dir, "bad", func(r *record.Recording) { r.Trials[0].MVC = -1 })
	if err != nil {
		t.Fatal(err)
	}
	paths := []string{good, bad, filepath.Join(dir, "missing.h5"), good}
	calls := 0
	reps := Files(paths, DefaultOptions(), 2, func(i int, r *Report) { calls++ })
	if calls != 4 || len(reps) != 4 {
		t.Fatalf("calls %d reports %d", calls, len(reps))
	}
	for i, r := range reps {
		if r.File != paths[i] {
			t.Fatalf("report %d is for %s", i, r.File)
		}
	}
	if reps[0].Failed() || !reps[1].Failed() || reps[1].ReadError != "" || reps[2].ReadError == "" || reps[3].Failed() {
		t.Fatalf("verdicts: %+v %+v %+v %+v", reps[0], reps[1], reps[2], reps[3])
	}
}

// TestChunkDamageAgreesWithH5py: after one byte of a samples chunk is
// inverted, h5py (Debian python3-h5py, whose HDF5 library checks the
// Fletcher-32 filter on read) refuses to read that chunk, and validate
// reports checksum.chunk at the same chunk offset; the undamaged file reads
// in h5py and validates clean.
func TestChunkDamageAgreesWithH5py(t *testing.T) {
	needH5py(t)
	p, err := writeRecording(t, t.TempDir(), "c", nil)
	if err != nil {
		t.Fatal(err)
	}
	const probe = `
s = A['samples']
i = s.id.get_chunk_info(s.id.get_num_chunks() - 1)
print(i.byte_offset + i.size // 3, i.chunk_offset[0], i.chunk_offset[1])
`
	const readAll = `
try:
    A['samples'][...]
    print("read")
except OSError as e:
    print("refused")
`
	out := h5pyEdits(t, []string{p, p}, []string{probe, readAll})
	if out[1] != "read" {
		t.Fatalf("h5py cannot read the good file: %s", out[1])
	}
	var off, row, col int
	if _, err := fmt.Sscan(out[0], &off, &row, &col); err != nil {
		t.Fatalf("probe %q: %v", out[0], err)
	}
	flipByte(t, p, strconv.Itoa(off))
	if got := h5pyEdits(t, []string{p}, []string{readAll}); got[0] != "refused" {
		t.Fatalf("h5py read the damaged chunk: %s", got[0])
	}
	r := File(p, DefaultOptions())
	want := fmt.Sprintf("chunk at [%d, %d]", row, col)
	if len(r.Findings) != 1 || r.Findings[0].Check != "checksum.chunk" || !strings.Contains(r.Findings[0].Message, want) ||
		r.Findings[0].HDF5Path != "/trials/ramp_10/arrays/grid_a/samples" {
		t.Fatalf("want one checksum.chunk %s, got %v", want, r.Findings)
	}
}
