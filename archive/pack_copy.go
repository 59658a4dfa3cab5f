// Copying recordings into the staging folder and hashing them.

package archive

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"muarc/archive/bagit"
	"muarc/internal/atomicfile"
)

func sizeIs(path string, n int64) bool {
	st, err := os.Stat(path)
	return err == nil && st.Mode().IsRegular() && st.Size() == n
}

func (p *packer) hashInPlace(fr *FileRecord, path string) error {
	f, err := os.Open(path)
	if err != nil {
		fr.Status, fr.Message = StatusError, err.Error()
		return err
	}
	defer f.Close()
	mh := newMultiHash(p.algs())
	n, err := io.CopyBuffer(mh, progressReader{f, p.progress}, make([]byte, bagit.BufferSize))
	if err == nil {
		err = unchanged(path, fr, n)
	}
	if err != nil {
		fr.Status, fr.Message, fr.SHA256, fr.SHA512 = StatusError, err.Error(), "", ""
		return err
	}
	mh.set(fr)
	p.count(true, n)
	return nil
}

// unchanged checks the source still has the size and time it had before it
// was read: a file written to while packing would get a wrong hash.
func unchanged(path string, fr *FileRecord, read int64) error {
	st, err := os.Stat(path)
	if err != nil {
		return err
	}
	if read != fr.Bytes || st.Size() != fr.Bytes || st.ModTime().UnixNano() != fr.MtimeNs {
		return fmt.Errorf("changed while it was being read (size %d -> %d); pack again when nothing writes to the study folder", fr.Bytes, st.Size())
	}
	return nil
}

type progressReader struct {
	r  io.Reader
	fn func(int64)
}

func (r progressReader) Read(b []byte) (int, error) {
	n, err := r.r.Read(b)
	r.fn(int64(n))
	return n, err
}

// copyFile copies the source into the staging folder (a temporary file
// from atomicfile, synced and renamed), hashing the bytes as they pass.
// When fr already carries sums (from a shard report), the copy must give
// the same: otherwise the source changed since those were made, and
// errSumsDiffer is returned with fr left as it was.
func (p *packer) copyFile(fr *FileRecord, path string) error {
	fail := func(err error) error {
		err = atomicfile.NoSpace(p.out, err)
		fr.Status, fr.Message = StatusError, err.Error()
		return err
	}
	dst := p.dest(fr.Path)
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return fail(err)
	}
	in, err := os.Open(path)
	if err != nil {
		return fail(err)
	}
	defer in.Close()
	t, err := atomicfile.Create(dst, true)
	if err != nil {
		return fail(err)
	}
	out, err := t.Open()
	if err != nil {
		return fail(t.Abandon(err))
	}
	h := newMultiHash(p.algs())
	n, err := io.CopyBuffer(io.MultiWriter(out, h), progressReader{in, p.progress}, make([]byte, bagit.BufferSize))
	if cerr := out.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = unchanged(path, fr, n)
	}
	if err != nil {
		return fail(t.Abandon(err))
	}
	var got FileRecord
	h.set(&got)
	if p.hasAll(*fr) && (got.SHA256 != fr.SHA256 || p.opt.SHA512 && got.SHA512 != fr.SHA512) {
		os.Remove(t.Path)
		return errSumsDiffer
	}
	if err := t.Publish(); err != nil {
		return fail(err)
	}
	fr.SHA256, fr.SHA512 = got.SHA256, got.SHA512
	return nil
}

// errSumsDiffer: a copy's sums differ from those recorded for the same
// path, size and modification time.
var errSumsDiffer = errors.New("the content differs from the recorded sums although size and modification time match")

// stagedIntact re-hashes the staged copy of a recording that the resume
// cache says was copied, and reports whether it still has the recorded
// sums. Size and modification time prove nothing about the bytes: a copy
// damaged in the staging folder (a flipped bit, an edit) keeps both.
func (p *packer) stagedIntact(fr *FileRecord) bool {
	dst := p.dest(fr.Path)
	if !sizeIs(dst, fr.Bytes) {
		return false
	}
	f, err := os.Open(dst)
	if err != nil {
		return false
	}
	defer f.Close()
	h := newMultiHash(p.algs())
	n, err := io.CopyBuffer(h, progressReader{f, p.progress}, make([]byte, bagit.BufferSize))
	if err != nil || n != fr.Bytes {
		return false
	}
	var got FileRecord
	h.set(&got)
	return got.SHA256 == fr.SHA256 && (!p.opt.SHA512 || got.SHA512 == fr.SHA512)
}
