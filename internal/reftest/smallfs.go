//go:build linux

package reftest

import (
	"fmt"
	"syscall"
	"testing"
)

// SmallFS mounts a fresh tmpfs of sizeBytes on a temporary folder and
// returns the folder; it is unmounted when the test ends. A real small file
// system is the reference for what a full disk does to a writer (a
// size-limited file gives EFBIG, which is not the same). Mounting needs
// root (CI runs as root): under CI a failure to mount fails the test,
// elsewhere it skips.
func SmallFS(t testing.TB, sizeBytes int64) string {
	t.Helper()
	dir := t.TempDir()
	if err := syscall.Mount("tmpfs", dir, "tmpfs", syscall.MS_NOSUID|syscall.MS_NODEV, fmt.Sprintf("size=%d,mode=0755", sizeBytes)); err != nil {
		missing(t, "a small tmpfs (mount needs root)", err.Error())
	}
	t.Cleanup(func() {
		if err := syscall.Unmount(dir, 0); err != nil {
			syscall.Unmount(dir, syscall.MNT_DETACH)
		}
	})
	return dir
}
