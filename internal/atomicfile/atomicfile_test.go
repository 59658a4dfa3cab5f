package atomicfile

import (
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"muarc/internal/reftest"
)

func TestWritePublishesOnlyWhenComplete(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "out.txt")
	if err := WriteFile(p, []byte("first"), false); err != nil {
		t.Fatal(err)
	}
	if err := WriteFile(p, []byte("second"), false); !errors.Is(err, ErrExists) {
		t.Fatalf("want ErrExists, got %v", err)
	}
	boom := errors.New("boom")
	err := Write(p, true, func(f *os.File) error {
		f.Write([]byte("half"))
		return boom
	})
	if !errors.Is(err, boom) {
		t.Fatalf("want the fill error, got %v", err)
	}
	b, _ := os.ReadFile(p)
	ents, _ := os.ReadDir(dir)
	if string(b) != "first" || len(ents) != 1 {
		t.Fatalf("target %q, %d entries: a failed write must leave the old file and no temp", b, len(ents))
	}
	if err := WriteFile(p, []byte("third"), true); err != nil {
		t.Fatal(err)
	}
	fi, _ := os.Stat(p)
	b, _ = os.ReadFile(p)
	if string(b) != "third" || fi.Mode().Perm()&0o600 != 0o600 {
		t.Fatalf("overwrite: %q mode %v", b, fi.Mode())
	}
}

// Temporary files are mode 0600 while written and carry the writer's host
// and process id in their name.
func TestTempIsPrivateAndNamed(t *testing.T) {
	dir := t.TempDir()
	target := filepath.Join(dir, "out.h5")
	tmp, err := Create(target, false)
	if err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(tmp.Path)
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode().Perm() != 0o600 {
		t.Fatalf("temporary file mode %v, want 0600", fi.Mode().Perm())
	}
	host, pid, ok := parseOwner(strings.TrimPrefix(filepath.Base(tmp.Path), ".out.h5.tmp-"))
	if !ok || host != thisHost || pid != os.Getpid() {
		t.Fatalf("%s: owner %q %d %v", tmp.Path, host, pid, ok)
	}
	// A second writer of the same target in this process leaves it alone.
	if lo := Clean(target); len(lo) != 0 {
		t.Fatalf("Clean touched this process's own temporary file: %v", lo)
	}
	if err := os.WriteFile(tmp.Path, []byte("x"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := tmp.Publish(); err != nil {
		t.Fatal(err)
	}
	fi, _ = os.Stat(target)
	if fi.Mode().Perm() != os.FileMode(0o644&^processUmask) {
		t.Fatalf("published mode %v", fi.Mode().Perm())
	}
}

// Clean removes what a dead process on this host left, and keeps (and
// lists, with the command that removes it) what a live process, another
// host or an unknown writer left.
func TestCleanLeftovers(t *testing.T) {
	dir := t.TempDir()
	target := filepath.Join(dir, "rec.h5")
	// A process that has ended: its pid is free (or reused later, after
	// the file was written, which Clean also recognises).
	cmd := exec.Command("true")
	if err := cmd.Run(); err != nil {
		t.Fatal(err)
	}
	dead := cmd.Process.Pid
	live := os.Getppid()
	files := map[string]bool{ // name -> removed
		fmt.Sprintf(".rec.h5.tmp-%s-%d-123", thisHost, dead):   true,
		fmt.Sprintf(".rec.h5.tmp-%s-%d-456", thisHost, live):   false,
		fmt.Sprintf(".rec.h5.tmp-other-host-%d-789", dead):     false,
		".rec.h5.tmp-3141592":                                  false, // an older muarc's name
		fmt.Sprintf(".other.h5.tmp-%s-%d-123", thisHost, dead): false, // another target's
	}
	for n := range files {
		if err := os.WriteFile(filepath.Join(dir, n), []byte("partial"), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	var notes []string
	Notice = func(s string) { notes = append(notes, s) }
	defer func() { Notice = nil }()
	found := Clean(target)
	if len(found) != 4 {
		t.Fatalf("found %d leftovers, want the 4 of rec.h5: %+v", len(found), found)
	}
	for n, removed := range files {
		_, err := os.Stat(filepath.Join(dir, n))
		if gone := err != nil; gone != removed {
			t.Errorf("%s: removed %v, want %v", n, gone, removed)
		}
	}
	if len(notes) != 4 {
		t.Fatalf("notes: %q", notes)
	}
	kept := 0
	for _, n := range notes {
		if strings.Contains(n, "remove it: rm -f -- ") {
			kept++
		}
	}
	if kept != 3 {
		t.Fatalf("want 3 kept files listed with their rm command: %q", notes)
	}
	// CleanDir, for a batch writing many outputs into dir, also takes the
	// dead writer's file of the other target.
	notes = nil
	if found := CleanDir(dir); len(found) != 4 {
		t.Fatalf("CleanDir found %+v", found)
	}
	if _, err := os.Stat(filepath.Join(dir, fmt.Sprintf(".other.h5.tmp-%s-%d-123", thisHost, dead))); !os.IsNotExist(err) {
		t.Fatal("CleanDir left the dead writer's file of other.h5")
	}
}

// A full file system gives a *NoSpaceError naming the target and leaves
// neither the target nor a temporary file. The file system is a real 64 KiB
// tmpfs (the kernel's answer, ENOSPC, is the reference).
func TestNoSpaceOnARealSmallFileSystem(t *testing.T) {
	dir := reftest.SmallFS(t, 64<<10)
	target := filepath.Join(dir, "big.bin")
	err := WriteFile(target, make([]byte, 256<<10), false)
	var ns *NoSpaceError
	if !errors.As(err, &ns) || ns.Path != target || !errors.Is(err, syscall.ENOSPC) {
		t.Fatalf("got %v, want a NoSpaceError for %s", err, target)
	}
	if err.Error() != "no space left on device: "+target {
		t.Fatalf("message %q", err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Fatalf("left %v", ents)
	}
	// A failure in another library's words on a full disk is a full disk
	// too (HDF5 says "bytes actually written = 18446744073709551615").
	fill, _ := os.Create(filepath.Join(dir, "fill"))
	fill.Write(make([]byte, 256<<10)) // fills it, error expected
	fill.Close()
	other := errors.New("file write failed: bytes actually written = 18446744073709551615")
	if err := NoSpace(filepath.Join(dir, "x.h5"), other); !errors.As(err, &ns) {
		t.Fatalf("on a full disk: %v", err)
	}
	os.Remove(filepath.Join(dir, "fill"))
	if err := NoSpace(filepath.Join(dir, "x.h5"), other); err != other {
		t.Fatalf("with room left the error must stay as it is: %v", err)
	}
}

// WriteNew never replaces a file and leaves no temporary file.
func TestWriteNew(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "k.key")
	if err := WriteNew(p, []byte("secret\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := WriteNew(p, []byte("other\n"), 0o600); !errors.Is(err, ErrExists) {
		t.Fatalf("want ErrExists, got %v", err)
	}
	fi, _ := os.Stat(p)
	b, _ := os.ReadFile(p)
	ents, _ := os.ReadDir(dir)
	if string(b) != "secret\n" || fi.Mode().Perm() != 0o600 || len(ents) != 1 {
		t.Fatalf("%q %v %d entries", b, fi.Mode(), len(ents))
	}
}

// TestStartSync: a temporary file synced in the background while it is
// read is published with its content (Publish waits for the sync), and one
// abandoned after StartSync is removed; a second wait does not block.
func TestStartSync(t *testing.T) {
	dir := t.TempDir()
	for _, publish := range []bool{true, false} {
		target := filepath.Join(dir, fmt.Sprintf("out-%v.bin", publish))
		tmp, err := Create(target, false)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(tmp.Path, []byte("checked before publishing"), 0o600); err != nil {
			t.Fatal(err)
		}
		tmp.StartSync()
		tmp.StartSync() // no second sync
		if b, err := os.ReadFile(tmp.Path); err != nil || string(b) != "checked before publishing" {
			t.Fatalf("read back while syncing: %q %v", b, err)
		}
		if tmp.waitSync() != nil || tmp.waitSync() != nil {
			t.Fatal("sync failed")
		}
		if !publish {
			if err := tmp.Abandon(errors.New("check failed")); err == nil || err.Error() != "check failed" {
				t.Fatalf("abandon: %v", err)
			}
			if _, err := os.Stat(tmp.Path); !os.IsNotExist(err) {
				t.Fatalf("temporary file left: %v", err)
			}
			continue
		}
		if err := tmp.Publish(); err != nil {
			t.Fatal(err)
		}
		if b, err := os.ReadFile(target); err != nil || string(b) != "checked before publishing" {
			t.Fatalf("published: %q %v", b, err)
		}
	}
}
