package recfile

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"muarc/internal/reftest"
	"muarc/schema"
)

// TestLayoutSnippetsRun runs every python snippet of schema/LAYOUT.md with
// h5py (Debian python3-h5py, and python3-pandas for the data-frame one)
// against a file muarc wrote, so the specification's reading recipes stay
// true. Each snippet asserts what it reads.
func TestLayoutSnippetsRun(t *testing.T) {
	py := needH5py(t)
	path := filepath.Join(t.TempDir(), "rec.h5")
	if err := Write(path, fixture(), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	blocks := pythonBlocks(schema.Layout)
	if len(blocks) < 6 {
		t.Fatalf("found %d python snippets in LAYOUT.md, want at least 6", len(blocks))
	}
	for i, code := range blocks {
		out, err := exec.Command(py, "-c", "import sys\npath = sys.argv[1]\n"+code, path).CombinedOutput()
		if err != nil {
			t.Errorf("LAYOUT.md snippet %d failed: %v\n%s\n---\n%s", i+1, err, code, out)
		}
	}
}

func pythonBlocks(md string) []string {
	var out []string
	for {
		i := strings.Index(md, "```python\n")
		if i < 0 {
			return out
		}
		md = md[i+len("```python\n"):]
		j := strings.Index(md, "```")
		if j < 0 {
			return out
		}
		out = append(out, md[:j])
		md = md[j+3:]
	}
}

// fencedBlocks returns the bodies of every ```lang block of md.
func fencedBlocks(md, lang string) []string {
	var out []string
	open := "```" + lang + "\n"
	for {
		i := strings.Index(md, open)
		if i < 0 {
			return out
		}
		md = md[i+len(open):]
		j := strings.Index(md, "```")
		if j < 0 {
			return out
		}
		out = append(out, md[:j])
		md = md[j+3:]
	}
}

// TestLayoutRSnippetRuns runs LAYOUT.md's R snippet with hdf5r (Debian
// r-cran-hdf5r, an HDF5 reader that lists members alphabetically and
// reverses axes) against a file muarc wrote; the snippet asserts the
// [channel, sample] shape, the offsets against discharge_count, and reads
// in list_position order. Its printed figures are compared with the
// fixture's.
func TestLayoutRSnippetRuns(t *testing.T) {
	rs := reftest.NeedR(t, "hdf5r")
	blocks := fencedBlocks(schema.Layout, "r")
	if len(blocks) != 1 {
		t.Fatalf("found %d R snippets in LAYOUT.md, want 1", len(blocks))
	}
	path := filepath.Join(t.TempDir(), "rec.h5")
	rec := fixture()
	if err := Write(path, rec, WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	script := filepath.Join(t.TempDir(), "snippet.R")
	os.WriteFile(script, []byte("path <- commandArgs(trailingOnly = TRUE)[1]\n"+blocks[0]), 0o644)
	out, err := exec.Command(rs, script, path).CombinedOutput()
	if err != nil {
		t.Fatalf("R snippet failed: %v\n%s", err, out)
	}
	ar := rec.Trials[0].Arrays[0]
	maxRow, maxCol := 0, 0
	for _, c := range ar.Channels {
		maxRow, maxCol = max(maxRow, c.Row), max(maxCol, c.Column)
	}
	rows, _ := ar.Samples.Shape()
	want := fmt.Sprintf("%d %g %d %d %d", rows, ar.SamplingRateHz, maxRow, maxCol, len(ar.Decompositions[0].Units))
	if got := strings.TrimSpace(lastLine(string(out))); got != want {
		t.Fatalf("R snippet printed %q, want %q", got, want)
	}
}

// TestLayoutJSSnippetRuns runs LAYOUT.md's JavaScript snippet with h5wasm
// (npm h5wasm, installed into scripts/h5wasm by make test) under Node.js.
func TestLayoutJSSnippetRuns(t *testing.T) {
	node := reftest.NeedTool(t, "node", "nodejs")
	mod := reftest.NeedFile(t, filepath.Join("..", "scripts", "h5wasm", "node_modules", "h5wasm", "dist", "node", "hdf5_hl.js"), "npm h5wasm (make test installs it into scripts/h5wasm)")
	abs, _ := filepath.Abs(mod)
	blocks := fencedBlocks(schema.Layout, "js")
	if len(blocks) != 1 {
		t.Fatalf("found %d JavaScript snippets in LAYOUT.md, want 1", len(blocks))
	}
	path := filepath.Join(t.TempDir(), "rec.h5")
	rec := fixture()
	if err := Write(path, rec, WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	code := strings.Replace(blocks[0], `"h5wasm/node"`, strconv.Quote("file://"+abs), 1)
	script := filepath.Join(t.TempDir(), "snippet.mjs")
	os.WriteFile(script, []byte("const path = process.argv[2];\n"+code), 0o644)
	out, err := exec.Command(node, script, path).CombinedOutput()
	if err != nil {
		t.Fatalf("JavaScript snippet failed: %v\n%s", err, out)
	}
	ar := rec.Trials[0].Arrays[0]
	u := ar.Decompositions[0].Units[0]
	rows, _ := ar.Samples.Shape()
	want := fmt.Sprintf("%d %d %d %d", rows, len(ar.Channels), len(ar.Channels), len(u.Discharges))
	if got := strings.TrimSpace(lastLine(string(out))); got != want {
		t.Fatalf("JavaScript snippet printed %q, want %q", got, want)
	}
}

func lastLine(s string) string {
	lines := strings.Split(strings.TrimSpace(s), "\n")
	return lines[len(lines)-1]
}
