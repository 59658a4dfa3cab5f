package report

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// TestWriteEqualsBuildAndRender: the streamed page is byte for byte the
// page Build and Render make (three recordings, so the sections' order and
// anchors are covered), and the page Write returns keeps every section's
// verdict and figure captions but not the drawings.
func TestWriteEqualsBuildAndRender(t *testing.T) {
	dir := studyFolder(t)
	src, err := os.ReadFile(filepath.Join(dir, "sub", "reca.h5"))
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"recb.h5", "recc.h5"} {
		if err := os.WriteFile(filepath.Join(dir, "sub", name), src, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	opt := BuildOptions{Title: "Test study", Now: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)}
	p, err := Build(dir, opt)
	if err != nil {
		t.Fatal(err)
	}
	var want bytes.Buffer
	if err := Render(&want, p); err != nil {
		t.Fatal(err)
	}
	var got bytes.Buffer
	q, err := Write(&got, dir, opt)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got.Bytes(), want.Bytes()) {
		t.Fatalf("streamed page (%d bytes) differs from the rendered page (%d bytes)", got.Len(), want.Len())
	}
	if len(q.Recordings) != 3 {
		t.Fatalf("%d sections, want 3", len(q.Recordings))
	}
	for i, s := range q.Recordings {
		w := p.Recordings[i]
		if s.File != w.File || s.Status != w.Status || len(s.Figures) != len(w.Figures) || len(s.Figures) == 0 {
			t.Fatalf("section %d: %s %q %d figures, want %s %q %d", i, s.File, s.Status, len(s.Figures), w.File, w.Status, len(w.Figures))
		}
		for k, f := range s.Figures {
			if f.SVG != nil || f.Caption != w.Figures[k].Caption {
				t.Fatalf("section %d figure %d: %d SVG bytes kept, caption %q", i, k, len(f.SVG), f.Caption)
			}
		}
	}
}
