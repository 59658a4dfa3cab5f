package archive

import (
	"archive/tar"
	"bufio"
	"errors"
	"fmt"
	"io"
	"os"
	"path"
	"path/filepath"
	"strings"

	"muarc/archive/bagit"
)

// VerifyTar checks a deposit packed as one tar (pack --tar): it unpacks the
// tar into a temporary folder under tmpDir ("" = the system's), checks the
// bag there with VerifyDeposit and removes the folder. The tar must hold
// one top folder with the bag; entries that are not plain files or folders,
// or whose names leave that folder, are refused. Findings name files
// relative to the bag, as for a folder.
func VerifyTar(tarPath, tmpDir string, opt VerifyOptions) (*DepositReport, error) {
	f, err := os.Open(tarPath)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	tmp, err := os.MkdirTemp(tmpDir, "muarc-verify-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(tmp)
	top, err := untar(bufio.NewReaderSize(f, bagit.BufferSize), tmp)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", tarPath, err)
	}
	rep, err := VerifyDeposit(filepath.Join(tmp, top), opt)
	if rep != nil {
		rep.Deposit = tarPath
	}
	return rep, err
}

// untar unpacks r into dir and returns the name of the single top folder.
func untar(r io.Reader, dir string) (string, error) {
	tr := tar.NewReader(r)
	top := ""
	buf := make([]byte, bagit.BufferSize)
	for {
		h, err := tr.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return "", fmt.Errorf("not a readable tar: %w", err)
		}
		name := path.Clean(strings.TrimPrefix(h.Name, "./"))
		if name == "." {
			continue
		}
		if path.IsAbs(name) || name == ".." || strings.HasPrefix(name, "../") {
			return "", fmt.Errorf("entry %q leaves the tar's folder; refused", h.Name)
		}
		first, _, _ := strings.Cut(name, "/")
		if top == "" {
			top = first
		} else if first != top {
			return "", fmt.Errorf("entries under %q and %q: a deposit tar holds one top folder (the bag)", top, first)
		}
		target := filepath.Join(dir, filepath.FromSlash(name))
		switch h.Typeflag {
		case tar.TypeDir:
			if err := os.MkdirAll(target, 0o755); err != nil {
				return "", err
			}
		case tar.TypeReg:
			if err := os.MkdirAll(filepath.Dir(target), 0o755); err != nil {
				return "", err
			}
			out, err := os.OpenFile(target, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
			if err != nil {
				return "", fmt.Errorf("entry %q: %w", h.Name, err)
			}
			_, err = io.CopyBuffer(out, tr, buf)
			if cerr := out.Close(); err == nil {
				err = cerr
			}
			if err != nil {
				return "", fmt.Errorf("entry %q: %w", h.Name, err)
			}
		case tar.TypeXGlobalHeader:
			continue
		default:
			return "", fmt.Errorf("entry %q is a %s, not a plain file or folder; a deposit tar holds only those", h.Name, typeName(h.Typeflag))
		}
	}
	if top == "" {
		return "", errors.New("the tar is empty")
	}
	return top, nil
}

func typeName(t byte) string {
	switch t {
	case tar.TypeSymlink:
		return "symbolic link"
	case tar.TypeLink:
		return "hard link"
	case tar.TypeChar, tar.TypeBlock:
		return "device"
	case tar.TypeFifo:
		return "FIFO"
	}
	return fmt.Sprintf("tar entry of type %q", t)
}
