package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// crashingCopy damages the first global heap collection ("GCOL", where
// HDF5 keeps variable-length strings; it has no checksum) of a good file
// and returns a damaged copy, preferring damage that makes libhdf5 itself
// crash when validating in-process (seen with Debian's HDF5 1.10.8; h5dump
// crashes on the same bytes). crashed says whether such damage was found.
func crashingCopy(t *testing.T, good string) (bad string, crashed bool) {
	t.Helper()
	b, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	at := bytes.Index(b, []byte("GCOL"))
	if at < 0 {
		t.Fatal("no global heap collection in the file")
	}
	bad = filepath.Join(t.TempDir(), "damaged.h5")
	for off := at; off < at+200; off++ {
		c := append([]byte(nil), b...)
		copy(c[off:], []byte{0xaa, 0xaa, 0xaa})
		if err := os.WriteFile(bad, c, 0o644); err != nil {
			t.Fatal(err)
		}
		_, stderr, _ := runMuarc(t, ".", "validate", "--in-process", bad)
		if strings.Contains(stderr, "signal arrived during cgo execution") || strings.Contains(stderr, "SIGSEGV") {
			return bad, true
		}
	}
	return bad, false
}

// TestDamagedHeapNeverEndsTheRun: a file damaged where libhdf5 may crash
// is reported as unreadable by validate (exit 2), never a crash.
func TestDamagedHeapNeverEndsTheRun(t *testing.T) {
	good := testFile(t)
	bad, crashed := crashingCopy(t, good)
	t.Logf("in-process validation crashed libhdf5: %v", crashed)
	stdout, stderr, code := runMuarc(t, ".", "validate", bad, good)
	if code != 2 || strings.Contains(stderr, "goroutine ") {
		t.Fatalf("exit %d, want 2 and a report; stderr %.500s", code, stderr)
	}
	if !strings.Contains(stdout, "damaged.h5") || !strings.Contains(stdout, "rec.h5") {
		t.Fatalf("both files must be reported:\n%s", stdout)
	}
	if crashed && !strings.Contains(stdout, "HDF5 library crashed") {
		t.Fatalf("the crash should be named:\n%s", stdout)
	}
}

// TestVerifyContainsLibraryCrash: verify validates every recording of a
// deposit through the same isolation, so a damaged recording is a finding
// (exit 1), never a crash of verify.
func TestVerifyContainsLibraryCrash(t *testing.T) {
	good := testFile(t)
	bad, _ := crashingCopy(t, good)
	dir := t.TempDir()
	study := filepath.Join(dir, "study")
	os.MkdirAll(study, 0o755)
	b, _ := os.ReadFile(good)
	os.WriteFile(filepath.Join(study, "rec.h5"), b, 0o644)
	dep := filepath.Join(dir, "deposit")
	if _, stderr, code := runMuarc(t, dir, "pack", study, "-o", dep, "--allow-identified"); code != 0 {
		t.Fatalf("pack: exit %d: %s", code, stderr)
	}
	var inDeposit string
	filepath.Walk(filepath.Join(dep, "data"), func(p string, fi os.FileInfo, err error) error {
		if err == nil && strings.HasSuffix(p, "rec.h5") {
			inDeposit = p
		}
		return nil
	})
	if inDeposit == "" {
		t.Fatal("recording not found in the deposit")
	}
	d, _ := os.ReadFile(bad)
	if err := os.WriteFile(inDeposit, d, 0o644); err != nil {
		t.Fatal(err)
	}
	stdout, stderr, code := runMuarc(t, dir, "verify", dep)
	if code != 1 || strings.Contains(stderr, "goroutine ") || !strings.Contains(stdout+stderr, "rec.h5") {
		t.Fatalf("verify: exit %d\nstdout %.800s\nstderr %.800s", code, stdout, stderr)
	}
}

// TestShardedValidateMerges: two shards of a validate run write shard
// reports that merge-reports combines; a missing shard is refused.
func TestShardedValidateMerges(t *testing.T) {
	dir := t.TempDir()
	study := filepath.Join(dir, "study")
	os.MkdirAll(study, 0o755)
	b, _ := os.ReadFile(testFile(t))
	for _, n := range []string{"a.h5", "b.h5", "c.h5"} {
		os.WriteFile(filepath.Join(study, n), b, 0o644)
	}
	for i := 1; i <= 2; i++ {
		rep := filepath.Join(dir, "r"+string(rune('0'+i))+".json")
		if _, stderr, code := runMuarc(t, dir, "validate", study, "--shard", string(rune('0'+i))+"/2", "--shard-report", rep); code != 0 {
			t.Fatalf("shard %d: exit %d %s", i, code, stderr)
		}
	}
	merged := filepath.Join(dir, "merged.json")
	if _, stderr, code := runMuarc(t, dir, "merge-reports", filepath.Join(dir, "r1.json"), filepath.Join(dir, "r2.json"), "-o", merged); code != 0 {
		t.Fatalf("merge: exit %d %s", code, stderr)
	}
	m, _ := os.ReadFile(merged)
	for _, want := range []string{`"command": "validate"`, `"path": "a.h5"`, `"path": "b.h5"`, `"path": "c.h5"`, `"shard": "2/2 merged"`} {
		if !strings.Contains(string(m), want) {
			t.Fatalf("merged report lacks %s:\n%s", want, m)
		}
	}
	if _, _, code := runMuarc(t, dir, "merge-reports", filepath.Join(dir, "r1.json"), "-o", filepath.Join(dir, "half.json")); code != 1 {
		t.Fatalf("a missing shard: exit %d, want 1", code)
	}
}
