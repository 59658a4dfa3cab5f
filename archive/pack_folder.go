// Writing a deposit as a folder: staging, leftovers, rename into place.

package archive

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"muarc/archive/bagit"
	"muarc/internal/atomicfile"
)

// finishFolder writes the generated files and manifests into the staging
// folder, drops leftovers of earlier runs, and renames it into place.
func (p *packer) finishFolder(files []FileRecord, docs []doc) error {
	keep := map[string]bool{}
	entries := map[string][]bagit.Entry{}
	var octets, count int64
	for _, f := range files {
		if f.Status != StatusOK {
			continue
		}
		rp := path.Join(bagit.PayloadDir, RecordingsDir, f.Path)
		keep[rp] = true
		for _, alg := range p.algs() {
			entries[alg] = append(entries[alg], bagit.Entry{Path: rp, Sum: f.sum(alg)})
		}
		octets += f.Bytes
		count++
	}
	for _, d := range docs {
		if err := writeStaged(filepath.Join(p.staging, filepath.FromSlash(d.path)), d.data); err != nil {
			return err
		}
		keep[d.path] = true
		for _, alg := range p.algs() {
			entries[alg] = append(entries[alg], bagit.Entry{Path: d.path, Sum: sumOf(alg, d.data)})
		}
		octets += int64(len(d.data))
		count++
	}
	// Leftovers: recordings removed from the source since an interrupted
	// run, stray temporary copies.
	payload := filepath.Join(p.staging, bagit.PayloadDir)
	err := filepath.WalkDir(payload, func(fp string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(p.staging, fp)
		if !keep[filepath.ToSlash(rel)] {
			return os.Remove(fp)
		}
		return nil
	})
	if err != nil {
		return err
	}
	removeEmptyDirs(payload)
	p.res.PayloadFiles, p.res.PayloadBytes = count, octets

	for _, t := range p.tagFiles(entries, p.info(octets, count)) {
		if err := writeStaged(filepath.Join(p.staging, t.path), t.data); err != nil {
			return err
		}
	}
	if err := p.cache.close(); err != nil {
		return err
	}
	if err := os.Remove(filepath.Join(p.staging, cacheFile)); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	if err := publishDir(p.staging, p.out, p.opt.Overwrite); err != nil {
		return err
	}
	p.res.Output = p.out
	return nil
}

func removeEmptyDirs(root string) {
	var dirs []string
	filepath.WalkDir(root, func(fp string, d fs.DirEntry, err error) error {
		if err == nil && d.IsDir() && fp != root {
			dirs = append(dirs, fp)
		}
		return nil
	})
	sort.Sort(sort.Reverse(sort.StringSlice(dirs)))
	for _, d := range dirs {
		os.Remove(d) // fails, harmlessly, when not empty
	}
}

// writeStaged writes a generated file into the staging folder through
// atomicfile (temporary file, sync, rename), replacing what an earlier run
// left there.
func writeStaged(path string, data []byte) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	return atomicfile.WriteFile(path, data, true)
}

// publishDir renames the finished staging folder to out. With overwrite an
// existing out is moved aside first and removed after the rename.
func publishDir(staging, out string, overwrite bool) error {
	var old string
	if _, err := os.Lstat(out); err == nil {
		if !overwrite {
			return atomicfile.CheckTarget(out, false)
		}
		old = filepath.Join(filepath.Dir(out), fmt.Sprintf(".%s.old-%d", filepath.Base(out), time.Now().UnixNano()))
		if err := os.Rename(out, old); err != nil {
			return err
		}
	}
	if err := os.Rename(staging, out); err != nil {
		if old != "" {
			os.Rename(old, out)
		}
		return err
	}
	if d, err := os.Open(filepath.Dir(out)); err == nil {
		d.Sync()
		d.Close()
	}
	if old != "" {
		return os.RemoveAll(old)
	}
	return nil
}

// oldDeposits deals with the folders publishDir moves an existing deposit
// to (".<name>.old-<time>") when a run stops before removing them. When
// out exists the replacement finished and they are removed; when it does
// not, one of them is the only copy of the earlier deposit, so they are
// kept and listed with the command that puts the deposit back.
func (p *packer) oldDeposits() {
	dir, prefix := filepath.Dir(p.out), "."+filepath.Base(p.out)+".old-"
	ents, err := os.ReadDir(dir)
	if err != nil {
		return
	}
	_, err = os.Lstat(p.out)
	outThere := err == nil
	for _, e := range ents {
		if !e.IsDir() || !strings.HasPrefix(e.Name(), prefix) {
			continue
		}
		old := filepath.Join(dir, e.Name())
		if outThere {
			if err := os.RemoveAll(old); err == nil {
				p.note("removed %s, the earlier deposit an interrupted --overwrite run had replaced", old)
				continue
			}
		}
		p.note("%s holds an earlier deposit that an interrupted --overwrite run moved aside; put it back with: mv -- %s %s (or remove it: rm -rf -- %s)",
			old, atomicfile.ShellQuote(old), atomicfile.ShellQuote(p.out), atomicfile.ShellQuote(old))
	}
}
