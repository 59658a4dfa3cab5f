package main

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"muarc/recfile"
	"muarc/synth"
)

// TestDemoImportStep runs the demo's import stage on the generator's
// exports of its small test study.
func TestDemoImportStep(t *testing.T) {
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	ctx := &demoContext{Dir: dir, ExportsDir: filepath.Join(dir, "exports"), RecordingsDir: filepath.Join(dir, "recordings"), Out: &bytes.Buffer{}, Summary: map[string]any{}}
	for _, g := range gens {
		if err := g.WriteExports(ctx.ExportsDir); err != nil {
			t.Fatal(err)
		}
	}
	if err := demoImport(ctx); err != nil {
		t.Fatal(err)
	}
	if len(ctx.Recordings) != len(gens) {
		t.Fatalf("%d recordings, %d generated", len(ctx.Recordings), len(gens))
	}
	for i, p := range ctx.Recordings {
		if !filepath.IsAbs(p) {
			t.Errorf("%s is not absolute", p)
		}
		r, err := recfile.ReadAll(p)
		if err != nil {
			t.Fatal(err)
		}
		if r.Subject.ID != gens[i].Recording.Subject.ID || len(r.Trials) != len(gens[i].Recording.Trials) {
			t.Errorf("%s: subject %q, %d trials", p, r.Subject.ID, len(r.Trials))
		}
	}
	if _, err := os.Stat(filepath.Join(ctx.RecordingsDir, gens[0].Recording.Subject.ID+".h5")); err != nil {
		t.Error(err)
	}
	if !bytes.Contains(ctx.Out.(*bytes.Buffer).Bytes(), []byte("Import (muarc import")) {
		t.Errorf("output: %s", ctx.Out.(*bytes.Buffer).String())
	}
}
