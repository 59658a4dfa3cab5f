package archive

import (
	"encoding/json"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// buildMuarc builds the muarc command once for the end-to-end tests.
func buildMuarc(t *testing.T) string {
	t.Helper()
	if testing.Short() {
		t.Skip("builds the command; skipped under -short")
	}
	bin := filepath.Join(t.TempDir(), "muarc")
	goTool, err := exec.LookPath("go")
	if err != nil {
		t.Fatalf("the go command is needed to build muarc: %v", err)
	}
	cmd := exec.Command(goTool, "build", "-o", bin, "muarc/cmd/muarc")
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, b)
	}
	return bin
}

func run(t *testing.T, env []string, name string, args ...string) (string, int) {
	t.Helper()
	cmd := exec.Command(name, args...)
	cmd.Env = append(os.Environ(), env...)
	b, err := cmd.CombinedOutput()
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		return string(b), ee.ExitCode()
	}
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return string(b), 0
}

// The example job-array scripts run as a scheduler would run them (the
// array index in SLURM_ARRAY_TASK_ID), then the finishing script merges,
// packs and verifies; the exit codes follow the common contract (0 ok,
// 1 findings, 2 bad usage).
func TestCommandsAndJobArrayScripts(t *testing.T) {
	bin := buildMuarc(t)
	if _, err := exec.LookPath("sh"); err != nil {
		t.Skip("no sh")
	}
	path := "PATH=" + filepath.Dir(bin) + string(os.PathListSeparator) + os.Getenv("PATH")
	study := filepath.Join(fixture(t), "clean")
	work := filepath.Join(t.TempDir(), "work")
	deposit := filepath.Join(t.TempDir(), "deposit")
	for i := 1; i <= 2; i++ {
		out, code := run(t, []string{path, "STUDY=" + study, "WORK=" + work, "SLURM_ARRAY_TASK_ID=" + string(rune('0'+i)), "SLURM_ARRAY_TASK_COUNT=2"},
			"sh", "examples/pack_shards.sh")
		if code != 0 {
			t.Fatalf("shard %d: exit %d\n%s", i, code, out)
		}
	}
	out, code := run(t, []string{path, "STUDY=" + study, "WORK=" + work, "DEPOSIT=" + deposit, "SHARD_COUNT=2", "LICENCE=CC-BY-4.0"},
		"sh", "examples/pack_finish.sh")
	if code != 0 || !strings.Contains(out, "0 recordings checked, copied and hashed") || !strings.Contains(out, ": OK") {
		t.Fatalf("finish: exit %d\n%s", code, out)
	}

	// verify --json on the deposit, then on a damaged copy: exit 1 with the
	// file named.
	out, code = run(t, nil, bin, "verify", "--json", deposit)
	var v struct {
		OK bool `json:"ok"`
	}
	if code != 0 || json.Unmarshal([]byte(out), &v) != nil || !v.OK {
		t.Fatalf("verify: %d %s", code, out)
	}
	os.WriteFile(filepath.Join(deposit, "data", "stray.txt"), []byte("x"), 0o644)
	out, code = run(t, nil, bin, "verify", deposit)
	if code != 1 || !strings.Contains(out, "data/stray.txt") {
		t.Fatalf("damaged verify: %d %s", code, out)
	}

	// Refused recordings: exit 1, nothing written; bad usage: exit 2.
	ident := filepath.Join(fixture(t), "identified")
	dep2 := filepath.Join(t.TempDir(), "d2")
	if out, code = run(t, nil, bin, "pack", ident, "-o", dep2, "--licence", "CC0-1.0"); code != 1 || !strings.Contains(out, "subject.name") {
		t.Fatalf("identified pack: %d %s", code, out)
	}
	if _, err := os.Stat(dep2); !os.IsNotExist(err) {
		t.Fatal("deposit written for a refused study")
	}
	if _, code = run(t, nil, bin, "pack", study, "-o", dep2, "--shard", "3/2"); code != 2 {
		t.Fatalf("bad shard: exit %d", code)
	}
	if _, code = run(t, nil, bin, "merge-reports", filepath.Join(work, "shard-1-of-2.json"), "-o", filepath.Join(work, "m1.json")); code != 1 {
		t.Fatalf("merge with a shard missing: exit %d", code)
	}
	if out, code = run(t, nil, bin, "index", "--tsv", study); code != 0 || strings.Count(out, "\n") != 9 {
		t.Fatalf("index: %d\n%s", code, out)
	}
	if _, code = run(t, nil, bin, "index", filepath.Join(study, "missing")); code != 2 {
		t.Fatalf("index of a missing folder: exit %d", code)
	}
}
