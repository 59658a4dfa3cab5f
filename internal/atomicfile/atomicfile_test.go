package atomicfile

import (
	"errors"
	"os"
	"path/filepath"
	"testing"
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
