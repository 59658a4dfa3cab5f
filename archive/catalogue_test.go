package archive

import (
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"
)

// copyKeepTimes copies the recordings (and any catalogue) of src into dst,
// keeping each file's modification time, as cp -p does: size and
// modification time stay, change time and inode do not.
func copyKeepTimes(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.Walk(src, func(p string, fi os.FileInfo, err error) error {
		if err != nil || fi.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		out := filepath.Join(dst, rel)
		if err := os.MkdirAll(filepath.Dir(out), 0o755); err != nil {
			return err
		}
		in, err := os.Open(p)
		if err != nil {
			return err
		}
		defer in.Close()
		o, err := os.Create(out)
		if err != nil {
			return err
		}
		if _, err := io.Copy(o, in); err != nil {
			return err
		}
		if err := o.Close(); err != nil {
			return err
		}
		return os.Chtimes(out, fi.ModTime(), fi.ModTime())
	})
	if err != nil {
		t.Fatal(err)
	}
}

func rowsJSON(t *testing.T, sums []RecordingSummary) string {
	t.Helper()
	b, err := json.Marshal(sums)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func indexStudy(t *testing.T, dir string, mode CatalogueMode, isolated bool) ([]RecordingSummary, StudyInfo) {
	t.Helper()
	sums, info, err := IndexStudy(dir, StudyOptions{Catalogue: mode, Isolated: isolated})
	if err != nil {
		t.Fatal(err)
	}
	return sums, info
}

func counts(info StudyInfo) [4]int {
	return [4]int{info.Recordings, info.Reused, info.Rechecked, info.Read}
}

// The catalogue gives the rows a full read gives, is used only for files
// whose stamp or content check matches, follows added and removed files,
// and is discarded when in doubt. The rows read in worker processes equal
// those read in this process.
func TestCatalogue(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "study")
	copyKeepTimes(t, filepath.Join(fixture(t), "clean"), dir)
	want, err := Summaries(dir, 0)
	if err != nil || len(want) != 2 {
		t.Fatalf("%d summaries, %v", len(want), err)
	}
	wantJSON := rowsJSON(t, want)

	// No catalogue yet: CatalogueUse reads everything and writes nothing.
	got, info := indexStudy(t, dir, CatalogueUse, true)
	if rowsJSON(t, got) != wantJSON || counts(info) != [4]int{2, 0, 0, 2} || info.Written {
		t.Fatalf("use without catalogue: %+v\n%s\nwant\n%s", info, rowsJSON(t, got), wantJSON)
	}
	if _, err := os.Stat(filepath.Join(dir, CatalogueName)); !os.IsNotExist(err) {
		t.Fatalf("catalogue written without --catalogue: %v", err)
	}
	got, info = indexStudy(t, dir, CatalogueCreate, true)
	if rowsJSON(t, got) != wantJSON || counts(info) != [4]int{2, 0, 0, 2} || !info.Written {
		t.Fatalf("create: %+v", info)
	}
	b, err := os.ReadFile(filepath.Join(dir, CatalogueName))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(string(b), "\n"), "\n")
	if len(lines) != 3 || !strings.HasPrefix(lines[0], `{"format":"muarc-catalogue","format_version":1,`) {
		t.Fatalf("catalogue:\n%s", b)
	}
	// Unchanged: answered from the catalogue alone, not rewritten.
	got, info = indexStudy(t, dir, CatalogueUse, false)
	if rowsJSON(t, got) != wantJSON || counts(info) != [4]int{2, 2, 0, 0} || info.Written {
		t.Fatalf("unchanged: %+v", info)
	}

	// A copy keeps size and modification time but not change time and
	// inode: the content check decides, and the copy's catalogue is
	// refreshed. A content check that differs makes the file read again.
	cp := filepath.Join(t.TempDir(), "copy")
	copyKeepTimes(t, dir, cp)
	cat := filepath.Join(cp, CatalogueName)
	b, _ = os.ReadFile(cat)
	b = []byte(strings.Replace(string(b), `"content":"metadata_sha256:`, `"content":"metadata_sha256:0`, 1))
	if err := os.WriteFile(cat, b, 0o644); err != nil {
		t.Fatal(err)
	}
	got, info = indexStudy(t, cp, CatalogueUse, true)
	if rowsJSON(t, got) != wantJSON || counts(info) != [4]int{2, 0, 1, 1} || !info.Written {
		t.Fatalf("copy: %+v", info)
	}
	if _, info = indexStudy(t, cp, CatalogueUse, true); counts(info) != [4]int{2, 2, 0, 0} {
		t.Fatalf("copy, second run: %+v", info)
	}

	// A changed modification time, a removed file.
	later := time.Now().Add(time.Hour)
	if err := os.Chtimes(filepath.Join(cp, "s1_a.h5"), later, later); err != nil {
		t.Fatal(err)
	}
	got, info = indexStudy(t, cp, CatalogueUse, false)
	if counts(info) != [4]int{2, 1, 0, 1} || rowsJSON(t, got) != wantJSON {
		t.Fatalf("touched: %+v", info)
	}
	if err := os.Remove(filepath.Join(cp, "visit2", "s1_b.h5")); err != nil {
		t.Fatal(err)
	}
	got, info = indexStudy(t, cp, CatalogueUse, false)
	if counts(info) != [4]int{1, 1, 0, 0} || !info.Written || len(got) != 1 || got[0].File != "s1_a.h5" {
		t.Fatalf("removed: %+v %d", info, len(got))
	}

	// Doubt discards the whole catalogue, with a note.
	for name, edit := range map[string]func(string) string{
		"bad line":      func(s string) string { return s + "{not json\n" },
		"other version": func(s string) string { return strings.Replace(s, `"software":"muarc `, `"software":"muarc 9`, 1) },
		"count":         func(s string) string { return strings.Replace(s, `"files":1`, `"files":2`, 1) },
		"format":        func(s string) string { return strings.Replace(s, `"format_version":1`, `"format_version":2`, 1) },
	} {
		b, _ := os.ReadFile(filepath.Join(cp, CatalogueName))
		if err := os.WriteFile(filepath.Join(cp, CatalogueName), []byte(edit(string(b))), 0o644); err != nil {
			t.Fatal(err)
		}
		_, info = indexStudy(t, cp, CatalogueUse, false)
		if counts(info) != [4]int{1, 0, 0, 1} || len(info.Notes) != 1 || !strings.Contains(info.Notes[0], "is not used") {
			t.Errorf("%s: %+v", name, info)
		}
		// The note's catalogue was not trusted; it is left for --catalogue.
		if _, info = indexStudy(t, cp, CatalogueCreate, false); !info.Written {
			t.Errorf("%s: not rewritten: %+v", name, info)
		}
	}

	// A file that cannot be read is named, never cached.
	if err := os.WriteFile(filepath.Join(cp, "broken.h5"), []byte("not HDF5"), 0o644); err != nil {
		t.Fatal(err)
	}
	sums, info, err := IndexStudy(cp, StudyOptions{Catalogue: CatalogueUse, Isolated: true})
	if err == nil || !strings.Contains(err.Error(), "broken.h5") || len(sums) != 1 || counts(info) != [4]int{2, 1, 0, 1} {
		t.Fatalf("broken: %v %+v", err, info)
	}
	b, _ = os.ReadFile(filepath.Join(cp, CatalogueName))
	if strings.Contains(string(b), "broken.h5") {
		t.Fatal("an unreadable file was cached")
	}
	if !reflect.DeepEqual(sums[0].Rows, want[0].Rows) && rowsJSON(t, sums[:1]) != rowsJSON(t, want[:1]) {
		t.Fatal("rows changed")
	}
}
