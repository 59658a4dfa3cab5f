package analysis

import (
	"bytes"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"muarc/recfile"
	"muarc/synth"
)

// TestWriteKeepsWhatItDoesNotRead: a recording to which a lab added its own
// group, a trigger dataset and an external link (here with h5py, Debian
// python3-h5py) is not rewritten by stats --write, which would lose them:
// the error names each part and the file's bytes are unchanged. Without
// them the figures are stored.
func TestWriteKeepsWhatItDoesNotRead(t *testing.T) {
	py := needPython(t, "h5py")
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	path := filepath.Join(dir, "rec.h5")
	if err := recfile.Write(path, gens[0].Recording, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	plain := filepath.Join(dir, "plain.h5")
	b, _ := os.ReadFile(path)
	os.WriteFile(plain, b, 0o644)
	trial := gens[0].Recording.Trials[0].Name
	script := `import sys, h5py
with h5py.File(sys.argv[1], "r+") as f:
    f.create_group("lab_notes")["text"] = "kept by the lab"
    f["trials/" + sys.argv[2]]["trigger"] = [1, 2, 3]
    f["trials/" + sys.argv[2] + "/elsewhere"] = h5py.ExternalLink("other.h5", "/x")
`
	if out, err := exec.Command(py, "-c", script, path, trial).CombinedOutput(); err != nil {
		t.Fatalf("h5py: %v\n%s", err, out)
	}
	before, _ := os.ReadFile(path)
	_, err = StatsFile(path, false, true)
	var le *LostError
	if !errors.As(err, &le) {
		t.Fatalf("want a LostError, got %v", err)
	}
	want := []string{"/lab_notes", "/lab_notes/text", "/trials/" + trial + "/elsewhere", "/trials/" + trial + "/trigger"}
	if len(le.Lost) != len(want) {
		t.Fatalf("lost %v, want %v", le.Lost, want)
	}
	for i := range want {
		if le.Lost[i] != want[i] {
			t.Fatalf("lost %v, want %v", le.Lost, want)
		}
	}
	if after, _ := os.ReadFile(path); !bytes.Equal(before, after) {
		t.Fatal("the recording changed")
	}
	if res, err := StatsFile(plain, false, true); err != nil || !res.Written {
		t.Fatalf("a recording without such parts: %v", err)
	}
}
