// Package atomicfile writes output files so that a reader never sees half of
// one: data goes to a temporary file beside the target, is synced to disk,
// then renamed over the target, and the folder is synced. A failed or
// abandoned write leaves the target as it was.
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

// TempPath returns a fresh, unused temporary name beside path (same folder,
// so the final rename stays on one file system). The file is created empty
// with mode 0600 so no other writer can take the name.
func TempPath(path string) (string, error) {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return "", err
	}
	name := f.Name()
	if err := f.Close(); err != nil {
		os.Remove(name)
		return "", err
	}
	return name, nil
}

// Publish syncs tmp, renames it to path and syncs the folder. With overwrite
// false it refuses (and removes tmp) when path appeared in the meantime.
func Publish(tmp, path string, overwrite bool) error {
	if err := CheckTarget(path, overwrite); err != nil {
		os.Remove(tmp)
		return err
	}
	f, err := os.OpenFile(tmp, os.O_RDWR, 0)
	if err != nil {
		os.Remove(tmp)
		return err
	}
	if err := f.Sync(); err != nil {
		f.Close()
		os.Remove(tmp)
		return fmt.Errorf("%s: sync: %w", path, err)
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	// Temp files are created 0600; a published file gets the usual 0644
	// less the umask, as os.Create would give.
	if err := os.Chmod(tmp, os.FileMode(0o644&^processUmask)); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return err
	}
	return syncDir(filepath.Dir(path))
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
	if err := CheckTarget(path, overwrite); err != nil {
		return err
	}
	tmp, err := TempPath(path)
	if err != nil {
		return err
	}
	f, err := os.OpenFile(tmp, os.O_WRONLY|os.O_TRUNC, 0)
	if err != nil {
		os.Remove(tmp)
		return err
	}
	if err := fill(f); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	return Publish(tmp, path, overwrite)
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
