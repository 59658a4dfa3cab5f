package validate

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"muarc/record"
)

var (
	fuzzOnce sync.Once
	fuzzGood []byte
	fuzzErr  error
)

// smallGood is the bytes of a small valid file (goodRecording cut to 2048
// rows, 1 s), written once per test binary.
func smallGood(t testing.TB) []byte {
	fuzzOnce.Do(func() {
		dir, err := os.MkdirTemp("", "muarc-fuzz-")
		if err != nil {
			fuzzErr = err
			return
		}
		defer os.RemoveAll(dir)
		p, err := writeRecording(t, dir, "small", func(r *record.Recording) {
			a := &r.Trials[0].Arrays[0]
			m := a.Samples.(*record.MemSamples)
			m.Samples, m.F32 = 2048, m.F32[:2048*m.Channels]
			r.Trials[0].Force.Values = r.Trials[0].Force.Values[:2048]
			for k := range a.Decompositions[0].Units {
				u := &a.Decompositions[0].Units[k]
				u.Discharges = u.Discharges[:12] // the last at 100+20k+11*170 < 2048
			}
		})
		if err != nil {
			fuzzErr = err
			return
		}
		fuzzGood, fuzzErr = os.ReadFile(p)
	})
	if fuzzErr != nil {
		t.Fatal(fuzzErr)
	}
	return fuzzGood
}

// childEnv names the file a re-executed test binary validates (see
// TestMain): the fuzz test runs each validation in a child process so that
// a crash of the HDF5 C library is told apart from a muarc failure.
const childEnv = "MUARC_VALIDATE_FUZZ_CHILD"

func TestMain(m *testing.M) {
	ServeWorker()
	if p := os.Getenv(childEnv); p != "" {
		json.NewEncoder(os.Stdout).Encode(File(p, DefaultOptions()))
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// crashedInC reports whether a child's stderr is a Go runtime dump of a
// fault inside C code.
func crashedInC(stderr string) bool {
	return strings.Contains(stderr, "signal arrived during cgo execution")
}

// h5dumpCrashes reports whether h5dump (hdf5-tools, the HDF5 library's own
// reader) dies of a signal on the file: then the crash is the library's,
// not muarc's.
func h5dumpCrashes(t *testing.T, p string) bool {
	t.Helper()
	if _, err := exec.LookPath("h5dump"); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("h5dump (hdf5-tools) is required under CI: %v", err)
		}
		t.Skipf("h5dump not available: %v", err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	err := exec.CommandContext(ctx, "h5dump", p).Run()
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		if ws, ok := ee.Sys().(syscall.WaitStatus); ok && ws.Signaled() && ws.Signal() != syscall.SIGKILL {
			return true
		}
	}
	return false
}

// FuzzValidateCorrupt overwrites bytes of a valid file and validates it:
// validation must return a report (a read error or findings), never panic
// and never hang. Seeds hit the superblock, the object headers and the
// sample chunks near the end of the file. Each validation runs in a child
// process; a child that dies inside the HDF5 C library passes only when
// h5dump dies on the same bytes (a fault of libhdf5 on damaged metadata,
// which `muarc validate` contains by validating each file in a child
// process).
func FuzzValidateCorrupt(f *testing.F) {
	for _, s := range []struct {
		off  uint32
		val  byte
		span uint8
	}{
		{0, 0x00, 1}, {8, 0xff, 1}, {40, 0x7f, 4}, {96, 0x01, 2}, {300, 0xff, 8}, {800, 0x00, 16},
		{2000, 0xaa, 4}, {2111, 0xaa, 3}, {4000, 0xff, 1}, {12000, 0x00, 8}, {30000, 0xff, 2}, {50000, 0x10, 1}, {0xfffffff0, 0x55, 32}, {0xffffff00, 0xff, 64},
	} {
		f.Add(s.off, s.val, s.span)
	}
	f.Fuzz(func(t *testing.T, off uint32, val byte, span uint8) {
		good := smallGood(t)
		b := append([]byte(nil), good...)
		// Offsets past 0xf0000000 count back from the end, so seeds reach
		// the sample chunks.
		start := int(off % uint32(len(b)))
		if off >= 0xf0000000 {
			start = len(b) - 1 - int(^off%uint32(len(b)))
		}
		end := min(start+int(span%64)+1, len(b))
		changed := false
		for i := start; i < end; i++ {
			changed = changed || b[i] != val
			b[i] = val
		}
		p := filepath.Join(t.TempDir(), "c.h5")
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
		defer cancel()
		cmd := exec.CommandContext(ctx, os.Args[0], "-test.run=^$")
		cmd.Env = append(os.Environ(), childEnv+"="+p)
		var stdout, stderr bytes.Buffer
		cmd.Stdout, cmd.Stderr = &stdout, &stderr
		err := cmd.Run()
		what := fmt.Sprintf("bytes %d..%d set to %#x", start, end-1, val)
		if ctx.Err() != nil {
			t.Fatalf("validation hung on %s", what)
		}
		if err != nil {
			if crashedInC(stderr.String()) && h5dumpCrashes(t, p) {
				t.Logf("%s: libhdf5 itself crashes on this file (h5dump too)", what)
				return
			}
			t.Fatalf("validation died on %s: %v\n%s", what, err, lastLines(stderr.String(), 30))
		}
		var r Report
		if err := json.Unmarshal(stdout.Bytes(), &r); err != nil {
			t.Fatalf("%s: child output %q: %v", what, stdout.String(), err)
		}
		if strings.HasPrefix(r.ReadError, "internal error") {
			t.Fatalf("panic on %s: %s", what, r.ReadError)
		}
		if r.File != p || r.Findings == nil {
			t.Fatalf("%s: incomplete report %+v", what, r)
		}
		if !changed && (r.ReadError != "" || len(r.Findings) > 0) {
			t.Fatalf("unchanged file fails: %+v", r)
		}
	})
}

func lastLines(s string, n int) string {
	ls := strings.Split(strings.TrimSpace(s), "\n")
	if len(ls) > n {
		ls = ls[len(ls)-n:]
	}
	return strings.Join(ls, "\n")
}
