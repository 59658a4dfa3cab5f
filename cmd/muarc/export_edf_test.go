package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
)

// TestExportEDFCommand: an identified recording is refused (exit 2, the
// flag named), --allow-identified writes one EDF+ file per trial with the
// rounding warning on stderr, and import reads the file back.
func TestExportEDFCommand(t *testing.T) {
	src := testFile(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "edf")
	_, stderr, code := runMuarc(t, dir, "export", src, "--format", "edf", "-o", out)
	if code != 2 || !strings.Contains(stderr, "--allow-identified") {
		t.Fatalf("identified source: exit %d %s", code, stderr)
	}
	stdout, stderr, code := runMuarc(t, dir, "export", src, "--format", "edf", "-o", out, "--allow-identified", "--json")
	if code != 0 {
		t.Fatalf("exit %d %s", code, stderr)
	}
	var res struct {
		Files []struct {
			File     string
			Trial    string
			Warnings []string
		}
	}
	if err := json.Unmarshal([]byte(stdout), &res); err != nil || len(res.Files) != 2 {
		t.Fatalf("%v %s", err, stdout)
	}
	if !strings.Contains(strings.Join(res.Files[0].Warnings, " "), "largest rounding error") {
		t.Errorf("no rounding warning: %+v", res.Files[0])
	}
	if _, stderr, code := runMuarc(t, dir, "import", "--emg", res.Files[0].File, "-o", filepath.Join(dir, "back.h5")); code != 0 {
		t.Fatalf("import of the EDF+ file: exit %d %s", code, stderr)
	}
}
