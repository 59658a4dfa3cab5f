package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"muarc/internal/reftest"
)

// TestDemoEndToEnd runs `muarc demo --json` as a user would and checks the
// whole job landed: every stage ran, the deposit passes BagIt's own
// checksums under sha256sum (coreutils, FIPS 180-4 SHA-256), and h5py
// (Debian python3-h5py) reads a de-identified recording of the deposit with
// no name, contact or full birth date left in it. A second run clears its own folder; a
// folder the demo did not make is refused. The README's python example runs
// on the demo's output, so the README stays true.
func TestDemoEndToEnd(t *testing.T) {
	sha := reftest.NeedTool(t, "sha256sum", "coreutils")
	py := reftest.NeedPython(t, "h5py")
	dir := t.TempDir()
	out := filepath.Join(dir, "demo")
	stdout, stderr, code := runMuarc(t, dir, "demo", "--out", out, "--json")
	if code != 0 {
		t.Fatalf("demo: exit %d\n%s", code, stderr)
	}
	var sum map[string]any
	if err := json.Unmarshal([]byte(stdout), &sum); err != nil {
		t.Fatalf("demo --json: %v\n%.500s", err, stdout)
	}
	var names []string
	for _, s := range sum["steps"].([]any) {
		st := s.(map[string]any)
		if st["ok"] != true {
			t.Fatalf("step %v failed", st["step"])
		}
		names = append(names, st["step"].(string))
	}
	if got := strings.Join(names, ","); got != "generate,import,table,stats,validate,deidentify,report,pack,bids" {
		t.Fatalf("demo steps %s", got)
	}
	// The BIDS-EMG form: one *_emg.bdf per trial (3 subjects x 3 levels).
	if bdfs, _ := filepath.Glob(filepath.Join(out, "bids", "sub-*", "ses-*", "emg", "*_emg.bdf")); len(bdfs) != 9 {
		t.Fatalf("%d _emg.bdf files in the BIDS dataset, want 9", len(bdfs))
	}
	dep := filepath.Join(out, "deposit")
	if b, err := runIn(dep, sha, "-c", "--quiet", "manifest-sha256.txt"); err != nil {
		t.Fatalf("sha256sum -c of the deposit: %v\n%s", err, b)
	}
	recs, _ := filepath.Glob(filepath.Join(dep, "data", "recordings", "*.h5"))
	if len(recs) != 3 {
		t.Fatalf("%d recordings in the deposit, want 3", len(recs))
	}
	b, err := runIn(dir, py, "-c", `
import sys, h5py
f = h5py.File(sys.argv[1], "r")
s = f["subject"].attrs
# Safe Harbor (45 CFR 164.514(b)(2)(i)(C)): of a birth date only the year stays.
assert "name" not in s and "email" not in s and "phone" not in s and len(s.get("birth_date", "")) in (0, 4)
assert s["id"].startswith("P-")
print(len(f["trials"]))
`, recs[0])
	if err != nil || strings.TrimSpace(string(b)) != "3" {
		t.Fatalf("h5py on the deposit: %v %s", err, b)
	}
	// The README's python example runs on the demo's output as written.
	readme, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	_, rest, ok := strings.Cut(string(readme), "```python\n")
	snippet, _, ok2 := strings.Cut(rest, "```")
	if !ok || !ok2 {
		t.Fatal("README.md has no python example")
	}
	snippet = strings.ReplaceAll(snippet, `"demo-out/`, `"`+filepath.ToSlash(out)+`/`)
	if b, err := runIn(dir, py, "-c", snippet+"\nassert emg.shape[0] > 0 and len(first_unit) > 0\n"); err != nil {
		t.Fatalf("README example: %v\n%s", err, b)
	}
	// Again: the folder is the demo's own, so it is cleared and remade.
	if _, stderr, code := runMuarc(t, dir, "demo", "--out", out, "--json"); code != 0 {
		t.Fatalf("second demo: exit %d %s", code, stderr)
	}
	foreign := filepath.Join(dir, "mine")
	os.MkdirAll(foreign, 0o755)
	os.WriteFile(filepath.Join(foreign, "keep.txt"), []byte("x"), 0o644)
	if _, stderr, code := runMuarc(t, dir, "demo", "--out", foreign); code != 2 || !strings.Contains(stderr, "not made by muarc demo") {
		t.Fatalf("foreign folder: exit %d %s", code, stderr)
	}
	if b, _ := os.ReadFile(filepath.Join(foreign, "keep.txt")); string(b) != "x" {
		t.Fatal("the demo touched a folder it did not make")
	}
}
