//go:build unix

package atomicfile

import "syscall"

// processUmask is the umask at start-up, read once: reading it means setting
// it, which must not race with other goroutines creating files.
var processUmask = func() uint32 {
	m := syscall.Umask(0)
	syscall.Umask(m)
	return uint32(m)
}()
