package recfile

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

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
