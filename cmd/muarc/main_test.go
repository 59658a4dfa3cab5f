package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/internal/reftest"
	"muarc/recfile"
	"muarc/schema"
	"muarc/synth"
	"muarc/validate"
)

// muarcBin is the command built once for these tests, run as a user would.
var muarcBin string

func TestMain(m *testing.M) {
	// The tests' own worker processes (damage_test.go) serve here.
	validate.ServeWorker()
	dir, err := os.MkdirTemp("", "muarc-cmd-test")
	if err != nil {
		panic(err)
	}
	muarcBin = filepath.Join(dir, "muarc")
	if out, err := exec.Command("go", "build", "-o", muarcBin, ".").CombinedOutput(); err != nil {
		os.Stderr.Write(out)
		panic(err)
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// runMuarc runs the built command and returns stdout, stderr and the exit
// status.
func runMuarc(t *testing.T, dir string, args ...string) (string, string, int) {
	t.Helper()
	cmd := exec.Command(muarcBin, args...)
	cmd.Dir = dir
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	code := 0
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		code = ee.ExitCode()
	} else if err != nil {
		t.Fatal(err)
	}
	return out.String(), errb.String(), code
}

// testFile writes the small generated recording and returns its path.
func testFile(t *testing.T) string {
	t.Helper()
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "rec.h5")
	if err := recfile.Write(path, gens[0].Recording, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestInspectAgreesWithH5py compares inspect's shapes, types and chunking
// with h5py's (Debian python3-h5py) view of the same file.
func TestInspectAgreesWithH5py(t *testing.T) {
	py := reftest.NeedPython(t, "h5py")
	path := testFile(t)
	stdout, stderr, code := runMuarc(t, ".", "inspect", "--json", path)
	if code != 0 {
		t.Fatalf("inspect exit %d: %s", code, stderr)
	}
	var ins inspection
	if err := json.Unmarshal([]byte(stdout), &ins); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(py, "-c", `
import sys, h5py
def visit(name, obj):
    if isinstance(obj, h5py.Dataset):
        print("/" + name, obj.dtype.kind + str(obj.dtype.itemsize), list(obj.shape), list(obj.chunks or []))
h5py.File(sys.argv[1], "r").visititems(visit)
`, path).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v %s", err, out)
	}
	kinds := map[string]string{"float32": "f4", "float64": "f8", "int64": "i8", "int32": "i4", "uint8": "u1", "bool": "b1", "string": "O8"}
	got := map[string]string{}
	for _, o := range ins.Objects {
		if o.Kind == "dataset" {
			got[o.Path] = strings.Join([]string{o.Path, kinds[o.Type], fmtInts(o.Shape), fmtInts(o.Chunk)}, " ")
		}
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	if len(lines) != len(got) || len(lines) < 20 {
		t.Fatalf("h5py sees %d datasets, inspect %d", len(lines), len(got))
	}
	for _, l := range lines {
		p := strings.Fields(l)[0]
		if got[p] != l {
			t.Errorf("h5py %q, inspect %q", l, got[p])
		}
	}
	if len(ins.Trials) == 0 || ins.Trials[0].Channels != 16 || ins.Trials[0].Units == 0 {
		t.Fatalf("trial summary %+v", ins.Trials)
	}
}

// The text tree names the root "/" and every group once, with one "/" at
// its end, indented by depth: the groups h5py's visititems finds, in the
// same words.
func TestInspectTreeNamesGroupsAsH5py(t *testing.T) {
	py := reftest.NeedPython(t, "h5py")
	path := testFile(t)
	stdout, stderr, code := runMuarc(t, ".", "inspect", path)
	if code != 0 {
		t.Fatalf("inspect exit %d: %s", code, stderr)
	}
	out, err := exec.Command(py, "-c", `
import sys, h5py
def visit(name, obj):
    if isinstance(obj, h5py.Group):
        print("  " * name.count("/") + "  " + name.split("/")[-1] + "/")
print("/")
h5py.File(sys.argv[1], "r").visititems(visit)
`, path).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v %s", err, out)
	}
	lines := map[string]bool{}
	for _, l := range strings.Split(stdout, "\n") {
		lines[l] = true
	}
	want := strings.Split(strings.TrimSpace(string(out)), "\n")
	if len(want) < 10 {
		t.Fatalf("h5py sees only %d groups", len(want))
	}
	for _, l := range want {
		if !lines[l] {
			t.Errorf("h5py's group line %q is not in inspect's tree", l)
		}
	}
	if strings.Contains(stdout, "//") {
		t.Errorf("a group is written with two slashes:\n%s", stdout)
	}
}

func fmtInts(v []int) string {
	b, _ := json.Marshal(v)
	if v == nil {
		return "[]"
	}
	return strings.ReplaceAll(string(b), ",", ", ")
}

func TestInspectBadInput(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "not.h5")
	os.WriteFile(bad, []byte("plain text, not HDF5"), 0o644)
	_, stderr, code := runMuarc(t, dir, "inspect", bad)
	if code != 2 || !strings.Contains(stderr, "not an HDF5 file") || !strings.Contains(stderr, bad) {
		t.Fatalf("exit %d, stderr %q", code, stderr)
	}
	_, stderr, code = runMuarc(t, dir, "inspect")
	if code != 2 || !strings.Contains(stderr, "accepts 1 arg") {
		t.Fatalf("usage: exit %d, %q", code, stderr)
	}
}

func TestSchemaCommandPrintsEmbeddedDocuments(t *testing.T) {
	out, _, code := runMuarc(t, ".", "schema")
	var v map[string]any
	if code != 0 || json.Unmarshal([]byte(out), &v) != nil || v["$schema"] != "http://json-schema.org/draft-07/schema#" {
		t.Fatalf("schema: exit %d, %.200s", code, out)
	}
	out, _, code = runMuarc(t, ".", "schema", "--layout")
	if code != 0 || !strings.HasPrefix(out, "# The muarc recording layout, version "+schema.LayoutVersion) {
		t.Fatalf("layout: exit %d, %.100s", code, out)
	}
}

// runIn runs a reference tool in dir and returns its combined output.
func runIn(dir, name string, args ...string) ([]byte, error) {
	cmd := exec.Command(name, args...)
	cmd.Dir = dir
	return cmd.CombinedOutput()
}
