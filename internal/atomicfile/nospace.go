package atomicfile

import (
	"errors"
	"os"
	"path/filepath"
	"syscall"
)

// NoSpaceError says that the file system holding Path filled up while
// Path was being written. Nothing was published under Path.
type NoSpaceError struct {
	// Path is the output that could not be written.
	Path string
	// Err is the failure as the writing layer reported it.
	Err error
}

func (e *NoSpaceError) Error() string { return "no space left on device: " + e.Path }

// Unwrap gives syscall.ENOSPC, so errors.Is(err, syscall.ENOSPC) holds, and
// the original error.
func (e *NoSpaceError) Unwrap() []error { return []error{syscall.ENOSPC, e.Err} }

// fullBelowBytes: a file system with less room than this (or than 1/64 of
// its size, when that is less) after a failed write is taken as full
// (common practice: a write that fails on a disk this close to full failed
// for want of room, whatever words the library that saw it used; the
// kernel fills the last blocks before it refuses a write).
const fullBelowBytes = 1 << 20

// NoSpace returns err as a *NoSpaceError for path when the write failed for
// want of room: err is ENOSPC, or err is any other failure and the file
// system holding path has less than 1 MiB left (libraries such as HDF5
// report a full disk in their own words, e.g. "bytes actually written =
// 18446744073709551615"). Other errors, and nil, come back unchanged.
func NoSpace(path string, err error) error {
	if err == nil {
		return nil
	}
	var ns *NoSpaceError
	if errors.As(err, &ns) {
		return err
	}
	if errors.Is(err, syscall.ENOSPC) || !errors.Is(err, ErrExists) && nearlyFull(path) {
		return &NoSpaceError{Path: path, Err: err}
	}
	return err
}

// nearlyFull reports whether the file system holding path has less than
// fullBelowBytes (or 1/64 of its size) left for this process.
func nearlyFull(path string) bool {
	var st syscall.Statfs_t
	if syscall.Statfs(filepath.Dir(path), &st) != nil {
		return false
	}
	free := st.Bavail // what unprivileged writers may use
	if os.Geteuid() == 0 {
		free = st.Bfree // root may use the reserved blocks too
	}
	limit := uint64(fullBelowBytes)
	if size := st.Blocks * uint64(st.Bsize); size/64 < limit {
		limit = size / 64
	}
	return free*uint64(st.Bsize) < limit
}
