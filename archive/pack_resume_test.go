package archive

import (
	"bytes"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/internal/batch"
)

// sha256sumOf is coreutils sha256sum's digest of a file (an outside tool).
func sha256sumOf(t *testing.T, path string) string {
	t.Helper()
	requireTool(t, "sha256sum")
	out, err := exec.Command("sha256sum", path).Output()
	if err != nil {
		t.Fatal(err)
	}
	return strings.Fields(string(out))[0]
}

// A byte flipped in a staged copy of an interrupted deposit keeps its size
// and time; the resumed run must find it by re-hashing, copy the recording
// again, and manifest the source's true digest.
func TestPackResumeRehashesStagedCopies(t *testing.T) {
	src := copyTree(t, filepath.Join(fixture(t), "clean"))
	ident, _ := os.ReadFile(filepath.Join(fixture(t), "identified", "subject1.h5"))
	os.WriteFile(filepath.Join(src, "late.h5"), ident, 0o644)
	out := filepath.Join(t.TempDir(), "deposit")
	opt := PackOptions{Licence: "CC-BY-4.0", Date: testDate}
	if res, err := Pack(src, out, opt); !errors.Is(err, ErrRefused) || res.Hashed != 2 {
		t.Fatalf("first run: %v %+v", err, res)
	}
	os.Remove(filepath.Join(src, "late.h5"))

	staged := filepath.Join(StagingPath(out), "data", "recordings", "s1_a.h5")
	st, err := os.Stat(staged)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(staged)
	b[len(b)/2] ^= 0x01
	if err := os.WriteFile(staged, b, 0o644); err != nil {
		t.Fatal(err)
	}
	os.Chtimes(staged, st.ModTime(), st.ModTime()) // size and time as they were

	res, err := Pack(src, out, opt)
	if err != nil {
		t.Fatalf("resumed run: %v", err)
	}
	if res.Hashed != 1 || res.Reused != 1 {
		t.Fatalf("resumed run: hashed %d reused %d; want the damaged copy copied again and the intact one reused", res.Hashed, res.Reused)
	}
	noted := false
	for _, n := range res.Notes {
		noted = noted || strings.Contains(n, "s1_a.h5: the staged copy") && strings.Contains(n, "copied and hashed again")
	}
	if !noted {
		t.Fatalf("no note about the damaged staged copy: %q", res.Notes)
	}
	dep := filepath.Join(out, "data", "recordings", "s1_a.h5")
	want, _ := os.ReadFile(filepath.Join(src, "s1_a.h5"))
	got, _ := os.ReadFile(dep)
	if !bytes.Equal(got, want) {
		t.Fatal("the deposit holds the damaged copy")
	}
	man, _ := os.ReadFile(filepath.Join(out, "manifest-sha256.txt"))
	if !strings.Contains(string(man), sha256sumOf(t, filepath.Join(src, "s1_a.h5"))+"  data/recordings/s1_a.h5\n") {
		t.Fatalf("manifest does not carry sha256sum's digest of the source:\n%s", man)
	}
	if rep, _ := VerifyDeposit(out, VerifyOptions{}); !rep.OK() {
		t.Fatalf("%v", rep.Findings)
	}
}

// Sums from a shard report are for the bytes that were hashed then; when
// a copy gives other sums (the file changed without its size or time
// changing), the recording is checked and hashed again instead of being
// manifested with the report's sums.
func TestPackKnownSumsAreChecked(t *testing.T) {
	src := filepath.Join(fixture(t), "clean")
	var known []*ShardReport
	for i := 1; i <= 2; i++ {
		rep, err := Pack(src, filepath.Join(t.TempDir(), "r.json"), PackOptions{Shard: batch.Shard{I: i, N: 2}})
		if err != nil {
			t.Fatal(err)
		}
		for j := range rep.Report.Files {
			if rep.Report.Files[j].Path == "s1_a.h5" {
				rep.Report.Files[j].SHA256 = strings.Repeat("0", 64)
			}
		}
		known = append(known, rep.Report)
	}
	out, res := packTo(t, src, PackOptions{Known: known})
	if res.Hashed != 1 || res.Reused != 1 {
		t.Fatalf("hashed %d reused %d; want s1_a.h5 hashed again", res.Hashed, res.Reused)
	}
	man, _ := os.ReadFile(filepath.Join(out, "manifest-sha256.txt"))
	if !strings.Contains(string(man), sha256sumOf(t, filepath.Join(src, "s1_a.h5"))+"  data/recordings/s1_a.h5\n") {
		t.Fatalf("manifest:\n%s", man)
	}
}
