package deid

import (
	"encoding/json"
	"errors"
	"fmt"
	"muarc/internal/atomicfile"
	"os"
	"path/filepath"
	"strings"
)

// The private linkage file: where it may go, and writing it.

// checkLinkage checks, before anything is written, that the linkage file
// can be written where asked: outside the output folder, in a folder that
// exists and takes a new file, and not over an existing file.
func checkLinkage(path, outDir string) error {
	if path == "" {
		return nil
	}
	if insideDir(path, outDir) {
		return fmt.Errorf("%s: the linkage file must not lie inside the output folder %s (it links pseudonyms back to people); give a path beside the originals", path, outDir)
	}
	if _, err := os.Lstat(path); err == nil {
		return fmt.Errorf("%s: %w (refusing to overwrite a linkage file; give a new name)", path, atomicfile.ErrExists)
	}
	dir := filepath.Dir(path)
	fi, err := os.Stat(dir)
	if err != nil || !fi.IsDir() {
		return fmt.Errorf("%s: the linkage file's folder %s does not exist; create it first (nothing was written)", path, dir)
	}
	probe, err := os.CreateTemp(dir, ".linkage-probe-*")
	if err != nil {
		return fmt.Errorf("%s: cannot write in %s: %v (nothing was written)", path, dir, err)
	}
	probe.Close()
	return os.Remove(probe.Name())
}

// insideDir reports whether path lies in dir (after resolving symbolic
// links of the existing parts).
func insideDir(path, dir string) bool {
	resolve := func(p string) string {
		a, err := filepath.Abs(p)
		if err != nil {
			return p
		}
		// resolve the longest existing prefix
		rest := ""
		for {
			if r, err := filepath.EvalSymlinks(a); err == nil {
				return filepath.Join(r, rest)
			}
			parent := filepath.Dir(a)
			if parent == a {
				return filepath.Join(a, rest)
			}
			rest = filepath.Join(filepath.Base(a), rest)
			a = parent
		}
	}
	p, d := resolve(path), resolve(dir)
	rel, err := filepath.Rel(d, p)
	return err == nil && rel != ".." && !strings.HasPrefix(rel, ".."+string(filepath.Separator))
}

type linkRow struct{ subj, subjP, sess, sessP, out string }

// writeLinkage writes the private linkage file (JSON: a warning and one
// entry per output), mode 0600, never overwriting.
func writeLinkage(path string, rows []linkRow) error {
	type link struct {
		SubjectID        string `json:"subject_id"`
		SubjectPseudonym string `json:"subject_pseudonym"`
		SessionID        string `json:"session_id,omitempty"`
		SessionPseudonym string `json:"session_pseudonym,omitempty"`
		Output           string `json:"output"`
	}
	doc := struct {
		Warning string `json:"warning"`
		Links   []link `json:"links"`
	}{Warning: "PRIVATE: this file links pseudonyms back to people. Keep it apart from the shared data, under the same protection as the originals."}
	for _, r := range rows {
		doc.Links = append(doc.Links, link{r.subj, r.subjP, r.sess, r.sessP, r.out})
	}
	b, _ := json.MarshalIndent(doc, "", "  ")
	if err := writeNew0600(path, append(b, '\n')); err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return err
		}
		return fmt.Errorf("linkage file: %w", err)
	}
	return nil
}
