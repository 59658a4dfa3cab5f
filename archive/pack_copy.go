// Copying recordings into the staging folder and hashing them.

package archive

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"muarc/archive/bagit"
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

// copyFile copies the source into the staging folder (temp name, sync,
// rename), hashing the bytes as they pass when hash is true.
func (p *packer) copyFile(fr *FileRecord, path string, hash bool) error {
	fail := func(err error) error {
		fr.Status, fr.Message = StatusError, err.Error()
		if hash {
			fr.SHA256, fr.SHA512 = "", ""
		}
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
	tmp := dst + ".copying"
	out, err := os.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return fail(err)
	}
	h := newMultiHash(p.algs())
	buf := make([]byte, bagit.BufferSize)
	var n int64
	for {
		k, rerr := in.Read(buf)
		if k > 0 {
			if _, err := out.Write(buf[:k]); err != nil {
				out.Close()
				os.Remove(tmp)
				return fail(err)
			}
			if hash {
				h.Write(buf[:k])
			}
			n += int64(k)
			p.progress(int64(k))
		}
		if rerr == io.EOF {
			break
		}
		if rerr != nil {
			out.Close()
			os.Remove(tmp)
			return fail(rerr)
		}
	}
	err = out.Sync()
	if cerr := out.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = unchanged(path, fr, n)
	}
	if err == nil {
		err = os.Rename(tmp, dst)
	}
	if err != nil {
		os.Remove(tmp)
		return fail(err)
	}
	if hash {
		h.set(fr)
	}
	return nil
}
