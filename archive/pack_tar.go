// Writing a deposit as one tar stream.

package archive

import (
	"archive/tar"
	"bufio"
	"fmt"
	"io"
	"os"
	"path"
	"time"

	"muarc/archive/bagit"
	"muarc/internal/atomicfile"
)

// writeTar streams the bag as one tar: bagit.txt, the payload (recordings
// hashed as they are written), then the generated files, the manifest,
// bag-info.txt and the tag manifest.
func (p *packer) writeTar(files []FileRecord, makeDocs func() ([]doc, error)) error {
	write := func(w io.Writer) error {
		bw := bufio.NewWriterSize(w, bagit.BufferSize)
		tw := tar.NewWriter(bw)
		now := p.bagDate().Truncate(time.Second)
		base := p.res.BagName
		dirs := map[string]bool{}
		mkdirs := func(rel string) error {
			var parts []string
			for d := path.Dir(rel); d != "." && d != "/"; d = path.Dir(d) {
				parts = append(parts, d)
			}
			for i := len(parts) - 1; i >= 0; i-- {
				if dirs[parts[i]] {
					continue
				}
				dirs[parts[i]] = true
				if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeDir, Name: base + "/" + parts[i] + "/", Mode: 0o755, ModTime: now}); err != nil {
					return err
				}
			}
			return nil
		}
		if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeDir, Name: base + "/", Mode: 0o755, ModTime: now}); err != nil {
			return err
		}
		put := func(rel string, data []byte) error {
			if err := mkdirs(rel); err != nil {
				return err
			}
			if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeReg, Name: base + "/" + rel, Mode: 0o644, Size: int64(len(data)), ModTime: now}); err != nil {
				return err
			}
			_, err := tw.Write(data)
			return err
		}
		if err := put(bagit.DeclarationFile, []byte(bagit.Declaration)); err != nil {
			return err
		}
		entries := map[string][]bagit.Entry{}
		var octets, count int64
		buf := make([]byte, bagit.BufferSize)
		for i := range files {
			fr := &files[i]
			if fr.Status != StatusOK {
				continue
			}
			rel := path.Join(bagit.PayloadDir, RecordingsDir, fr.Path)
			if err := mkdirs(rel); err != nil {
				return err
			}
			in, err := os.Open(p.abs(fr.Path))
			if err != nil {
				return fmt.Errorf("%s: %w", fr.Path, err)
			}
			if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeReg, Name: base + "/" + rel, Mode: 0o644, Size: fr.Bytes, ModTime: time.Unix(0, fr.MtimeNs).Truncate(time.Second)}); err != nil {
				in.Close()
				return err
			}
			h := newMultiHash(p.algs())
			n, err := io.CopyBuffer(io.MultiWriter(tw, h), progressReader{io.LimitReader(in, fr.Bytes), p.progress}, buf)
			in.Close()
			if err == nil {
				err = unchanged(p.abs(fr.Path), fr, n)
			}
			if err != nil {
				return fmt.Errorf("%s: %w", fr.Path, err)
			}
			h.set(fr)
			p.count(true, n)
			for _, alg := range p.algs() {
				entries[alg] = append(entries[alg], bagit.Entry{Path: rel, Sum: fr.sum(alg)})
			}
			octets += n
			count++
		}
		docs, err := makeDocs()
		if err != nil {
			return err
		}
		for _, d := range docs {
			if err := put(d.path, d.data); err != nil {
				return err
			}
			for _, alg := range p.algs() {
				entries[alg] = append(entries[alg], bagit.Entry{Path: d.path, Sum: sumOf(alg, d.data)})
			}
			octets += int64(len(d.data))
			count++
		}
		p.res.PayloadFiles, p.res.PayloadBytes = count, octets
		for _, t := range p.tagFiles(entries, p.info(octets, count)) {
			if t.path == bagit.DeclarationFile {
				continue // written first
			}
			if err := put(t.path, t.data); err != nil {
				return err
			}
		}
		if err := tw.Close(); err != nil {
			return err
		}
		return bw.Flush()
	}
	if p.opt.TarTo != nil {
		if err := write(p.opt.TarTo); err != nil {
			return err
		}
		p.res.Output = "-"
		return nil
	}
	if err := atomicfile.Write(p.out, p.opt.Overwrite, func(f *os.File) error { return write(f) }); err != nil {
		return err
	}
	p.res.Output = p.out
	return nil
}
