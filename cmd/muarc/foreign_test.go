package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"muarc/internal/reftest"
)

// foreignDir is where Debian's python-tables-data installs the HDF5 files
// that PyTables tests itself with: files written by other programs and
// other HDF5 versions, with big-endian types, filters this library lacks
// (LZO, Blosc, szip), external and soft links, nested compound and
// variable-length types and zero-dimensional attributes.
const foreignDir = "/usr/share/python-tables/tests"

// TestFilesWrittenByOtherPrograms puts every one of those files beside one
// muarc recording and runs the batch commands over the folder: each
// foreign file is named as not readable as a muarc recording, nothing
// panics or crashes, and the muarc recording is processed as if alone.
func TestFilesWrittenByOtherPrograms(t *testing.T) {
	reftest.NeedFile(t, filepath.Join(foreignDir, "float.h5"), "python-tables-data")
	foreign, _ := filepath.Glob(filepath.Join(foreignDir, "*.h5"))
	if len(foreign) < 30 {
		t.Fatalf("only %d files in %s", len(foreign), foreignDir)
	}
	dir := t.TempDir()
	study := filepath.Join(dir, "study")
	os.MkdirAll(study, 0o755)
	for _, f := range foreign {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(study, filepath.Base(f)), b, 0o644)
	}
	good, _ := os.ReadFile(smallFile(t))
	os.WriteFile(filepath.Join(study, "zz_good.h5"), good, 0o644)
	crashed := func(out string) bool {
		return strings.Contains(out, "panic") || strings.Contains(out, "goroutine ") || strings.Contains(out, "internal error")
	}

	stdout, stderr, code := runMuarc(t, dir, "validate", study)
	if code != 2 || crashed(stdout+stderr) {
		t.Fatalf("validate: exit %d\n%s\n%s", code, stdout, stderr)
	}
	for _, f := range foreign {
		if !strings.Contains(stdout, filepath.Base(f)) {
			t.Errorf("validate does not name %s", filepath.Base(f))
		}
	}
	if !regexp.MustCompile(`(?m)zz_good\.h5 +0 +\d+ +\d+ +(ok|warnings)$`).MatchString(stdout) {
		t.Errorf("validate: the muarc recording is not ok among foreign files:\n%s", stdout)
	}

	stdout, stderr, code = runMuarc(t, dir, "index", study)
	if code == 0 || crashed(stdout+stderr) || !strings.Contains(stdout, "zz_good.h5") || strings.Count(stderr, "cannot read") != len(foreign) {
		t.Fatalf("index: exit %d, %d foreign files named of %d\n%s\n%s", code, strings.Count(stderr, "cannot read"), len(foreign), stdout, stderr)
	}

	key := filepath.Join(dir, "k.key")
	runMuarc(t, dir, "key", "new", key)
	out := filepath.Join(dir, "deid")
	stdout, stderr, code = runMuarc(t, dir, "deidentify", study, "-o", out, "--key", key)
	if code == 0 || crashed(stdout+stderr) || !strings.Contains(stdout, "De-identified 1 of "+strconv.Itoa(len(foreign)+1)) {
		t.Fatalf("deidentify: exit %d\n%s\n%s", code, stdout, stderr)
	}
	written, _ := filepath.Glob(filepath.Join(out, "*.h5"))
	if len(written) != 1 {
		t.Fatalf("deidentify wrote %v, want the one muarc recording", written)
	}
	if _, stderr, code := runMuarc(t, dir, "validate", written[0]); code != 0 {
		t.Fatalf("the de-identified recording does not validate: %s", stderr)
	}
}

// TestDeidentifyNamesWhatItLeavesOut: a part another program added that the
// layout does not name (here an external link, made with h5py, Debian
// python3-h5py) is left out of the de-identified copy, and the report says
// so by its HDF5 path instead of dropping it without a word.
func TestDeidentifyNamesWhatItLeavesOut(t *testing.T) {
	py := reftest.NeedPython(t, "h5py")
	dir := t.TempDir()
	study := filepath.Join(dir, "study")
	os.MkdirAll(study, 0o755)
	rec := filepath.Join(study, "rec.h5")
	b, _ := os.ReadFile(smallFile(t))
	os.WriteFile(rec, b, 0o644)
	script := `import sys, h5py
with h5py.File(sys.argv[1], "r+") as f:
    f["lab_link"] = h5py.ExternalLink("elsewhere.h5", "/x")
`
	if out, err := exec.Command(py, "-c", script, rec).CombinedOutput(); err != nil {
		t.Fatalf("h5py: %v\n%s", err, out)
	}
	key := filepath.Join(dir, "k.key")
	runMuarc(t, dir, "key", "new", key)
	stdout, stderr, code := runMuarc(t, dir, "deidentify", study, "-o", filepath.Join(dir, "out"), "--key", key)
	if code != 0 || !strings.Contains(stdout, "note: left out, not part of the layout (muarc does not read or check them): /lab_link") {
		t.Fatalf("deidentify: exit %d\n%s\n%s", code, stdout, stderr)
	}
}
