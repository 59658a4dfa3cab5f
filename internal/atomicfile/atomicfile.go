// Package atomicfile writes output files so that a reader never sees half of
// one: data goes to a temporary file beside the target (mode 0600, named
// after the target, the host and the writing process), is synced to disk,
// then renamed over the target, and the folder is synced. A failed or
// abandoned write leaves the target as it was.
//
// A process killed while writing leaves its temporary file behind. The next
// write to the same target removes such files when their process is known
// to be gone (same host, process no longer running) and reports the others
// through Notice with the command that removes them. A full file system is
// reported as a *NoSpaceError naming the target, whatever layer (Go, HDF5)
// saw it first.
package atomicfile

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

// ErrExists is returned when the target exists and overwriting was not asked.
var ErrExists = errors.New("output exists")

// Notice, when not nil, is told about temporary files left by interrupted
// runs: those removed and those left in place (with the command that
// removes them). The muarc command prints these on stderr.
var Notice func(msg string)

func notice(format string, args ...any) {
	if Notice != nil {
		Notice(fmt.Sprintf(format, args...))
	}
}

// CheckTarget returns an error wrapping ErrExists, with a hint, when path
// exists and overwrite is false.
func CheckTarget(path string, overwrite bool) error {
	if overwrite {
		return nil
	}
	if _, err := os.Lstat(path); err == nil {
		return fmt.Errorf("%s: %w (give --overwrite to replace it)", path, ErrExists)
	} else if !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	return nil
}

// Temp is an output being written: Path is the temporary file beside
// Target, created empty with mode 0600. Fill it (by name, or through
// Open), then Publish it, or Abandon it on failure.
type Temp struct {
	// Path is the temporary file.
	Path string
	// Target is the final name Publish gives it.
	Target    string
	overwrite bool
	synced    chan error // StartSync's result, when started
}

// Create checks the target (ErrExists unless overwrite), cleans temporary
// files that interrupted runs left for the same target (see Clean), and
// creates a fresh temporary file beside it (same folder, so the final
// rename stays on one file system).
func Create(target string, overwrite bool) (*Temp, error) {
	if err := CheckTarget(target, overwrite); err != nil {
		return nil, err
	}
	Clean(target)
	f, err := os.CreateTemp(filepath.Dir(target), tempPrefix(target)+ownerTag()+"-*")
	if err != nil {
		return nil, NoSpace(target, err)
	}
	name := f.Name()
	if err := f.Close(); err != nil {
		os.Remove(name)
		return nil, NoSpace(target, err)
	}
	return &Temp{Path: name, Target: target, overwrite: overwrite}, nil
}

// Open opens the temporary file for writing from its start.
func (t *Temp) Open() (*os.File, error) {
	return os.OpenFile(t.Path, os.O_WRONLY|os.O_TRUNC, 0)
}

// Abandon removes the temporary file and returns err, as a *NoSpaceError
// for the target when the file system is full (checked before the file is
// removed, since removing it frees the space).
func (t *Temp) Abandon(err error) error {
	t.waitSync()
	err = NoSpace(t.Target, err)
	os.Remove(t.Path)
	return err
}

// StartSync starts writing the temporary file's data to disk in the
// background, for a caller that reads the finished file back (checks it)
// before Publish: the disk writes then overlap the checks. The file must
// not change after it. Publish waits for it and syncs once more (nothing
// is left to write by then), so nothing is published before it is on
// disk.
func (t *Temp) StartSync() {
	if t.synced != nil {
		return
	}
	t.synced = make(chan error, 1)
	go func() {
		f, err := os.Open(t.Path)
		if err == nil {
			err = f.Sync()
			if cerr := f.Close(); err == nil {
				err = cerr
			}
		}
		t.synced <- err
	}()
}

// waitSync waits for StartSync's sync, if one was started, and returns
// its error.
func (t *Temp) waitSync() error {
	if t.synced == nil {
		return nil
	}
	err := <-t.synced
	t.synced <- err // for a second wait
	return err
}

// Publish syncs the temporary file, gives it the usual mode (0644 less the
// umask, as os.Create would), renames it to the target and syncs the
// folder. Without overwrite it refuses (and removes the temporary file)
// when the target appeared in the meantime. On failure the temporary file
// is removed.
func (t *Temp) Publish() error {
	serr := t.waitSync()
	if err := CheckTarget(t.Target, t.overwrite); err != nil {
		os.Remove(t.Path)
		return err
	}
	if serr != nil {
		return t.Abandon(fmt.Errorf("%s: sync: %w", t.Target, serr))
	}
	f, err := os.OpenFile(t.Path, os.O_RDWR, 0)
	if err != nil {
		return t.Abandon(err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return t.Abandon(fmt.Errorf("%s: sync: %w", t.Target, err))
	}
	if err := f.Close(); err != nil {
		return t.Abandon(err)
	}
	if err := os.Chmod(t.Path, os.FileMode(0o644&^processUmask)); err != nil {
		return t.Abandon(err)
	}
	if err := os.Rename(t.Path, t.Target); err != nil {
		return t.Abandon(err)
	}
	return syncDir(filepath.Dir(t.Target))
}

// WriteFile writes data to path atomically.
func WriteFile(path string, data []byte, overwrite bool) error {
	return Write(path, overwrite, func(f *os.File) error {
		_, err := f.Write(data)
		return err
	})
}

// Write creates a temporary file beside path, lets fill write it, then
// publishes it. When fill fails the temporary file is removed and path is
// untouched.
func Write(path string, overwrite bool, fill func(*os.File) error) error {
	t, err := Create(path, overwrite)
	if err != nil {
		return err
	}
	f, err := t.Open()
	if err != nil {
		return t.Abandon(err)
	}
	if err := fill(f); err != nil {
		f.Close()
		return t.Abandon(err)
	}
	if err := f.Close(); err != nil {
		return t.Abandon(err)
	}
	return t.Publish()
}

// WriteNew writes data to a new file at path with mode perm, never
// replacing an existing file (not even one that appears while writing:
// the temporary file is hard-linked into place, which fails when path
// exists) and never leaving a partial one.
func WriteNew(path string, data []byte, perm os.FileMode) error {
	exists := func() error {
		return fmt.Errorf("%s: %w (refusing to overwrite; choose a new name)", path, ErrExists)
	}
	if _, err := os.Lstat(path); err == nil {
		return exists()
	} else if !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	t, err := Create(path, false)
	if err != nil {
		return err
	}
	defer os.Remove(t.Path)
	f, err := t.Open()
	if err != nil {
		return t.Abandon(err)
	}
	_, err = f.Write(data)
	if err == nil {
		err = f.Chmod(perm)
	}
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return t.Abandon(err)
	}
	if err := os.Link(t.Path, path); err != nil {
		if errors.Is(err, fs.ErrExist) {
			return exists()
		}
		return t.Abandon(err)
	}
	return syncDir(filepath.Dir(path))
}

func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	if err := d.Sync(); err != nil && !errors.Is(err, os.ErrInvalid) {
		return fmt.Errorf("%s: sync folder: %w", dir, err)
	}
	return nil
}
