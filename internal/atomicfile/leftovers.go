package atomicfile

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"time"
)

// Temporary names are ".<target name>.tmp-<host>-<pid>-<random>": the host
// and process that write them, so a later run can tell whether the writer
// is gone.

func tempPrefix(target string) string { return "." + filepath.Base(target) + ".tmp-" }

// ownerTag is "<host>-<pid>" for this process.
func ownerTag() string { return thisHost + "-" + strconv.Itoa(os.Getpid()) }

var thisHost = func() string {
	h, err := os.Hostname()
	if err != nil || h == "" {
		return "unknown"
	}
	return cleanHost(h)
}()

// cleanHost keeps a host name safe inside a file name.
func cleanHost(h string) string {
	b := []byte(h)
	for i, c := range b {
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '-') {
			b[i] = '_'
		}
	}
	if len(b) > 64 {
		b = b[:64]
	}
	return string(b)
}

// Leftover is a temporary file an earlier write to the same target left.
type Leftover struct {
	Path  string
	Bytes int64
	// Host and PID name the process that wrote it ("" and 0 when the name
	// does not say, as with files from older muarc versions).
	Host string
	PID  int
	// Removed is true when Clean removed it.
	Removed bool
	// Why says why it was kept.
	Why string
}

// parseOwner reads host and pid from the part of a temporary name after
// the prefix: "<host>-<pid>-<random>".
func parseOwner(rest string) (host string, pid int, ok bool) {
	i := strings.LastIndexByte(rest, '-')
	if i < 0 {
		return "", 0, false
	}
	j := strings.LastIndexByte(rest[:i], '-')
	if j <= 0 {
		return "", 0, false
	}
	pid, err := strconv.Atoi(rest[j+1 : i])
	if err != nil || pid <= 0 {
		return "", 0, false
	}
	return rest[:j], pid, true
}

// processGone reports whether the process that wrote a temporary file last
// modified at mtime is gone from this host: no process has the pid, or it
// is a zombie (killed, not yet reaped), or the process with that pid
// started after the file was last written (the pid was reused).
func processGone(pid int, mtime time.Time) bool {
	if errors.Is(syscall.Kill(pid, 0), syscall.ESRCH) {
		return true
	}
	state, started, ok := procStat(pid)
	if !ok {
		return false
	}
	return state == 'Z' || state == 'X' || started.After(mtime.Add(2*time.Second))
}

// procStat reads a process's state and start time from /proc (Linux).
func procStat(pid int) (state byte, started time.Time, ok bool) {
	b, err := os.ReadFile("/proc/" + strconv.Itoa(pid) + "/stat")
	if err != nil {
		return 0, time.Time{}, false
	}
	// "pid (comm) state ppid ...": comm may hold spaces and parentheses.
	i := bytes.LastIndexByte(b, ')')
	if i < 0 || i+2 >= len(b) {
		return 0, time.Time{}, false
	}
	f := strings.Fields(string(b[i+2:]))
	if len(f) < 20 {
		return 0, time.Time{}, false
	}
	// Field 22 of proc_pid_stat(5), the 20th after comm: start time in
	// clock ticks after boot; USER_HZ is 100 on Linux (from memory).
	ticks, err1 := strconv.ParseInt(f[19], 10, 64)
	boot, err2 := bootTime()
	if err1 != nil || err2 != nil {
		return f[0][0], time.Time{}, true
	}
	return f[0][0], boot.Add(time.Duration(ticks) * 10 * time.Millisecond), true
}

// bootTime reads btime from /proc/stat.
func bootTime() (time.Time, error) {
	b, err := os.ReadFile("/proc/stat")
	if err != nil {
		return time.Time{}, err
	}
	for _, l := range strings.Split(string(b), "\n") {
		if v, ok := strings.CutPrefix(l, "btime "); ok {
			s, err := strconv.ParseInt(strings.TrimSpace(v), 10, 64)
			return time.Unix(s, 0), err
		}
	}
	return time.Time{}, errors.New("no btime in /proc/stat")
}

// Clean looks for temporary files left beside target by interrupted writes
// to it. Those whose process is known to be gone (written on this host by
// a process no longer running) are removed; the others are kept, since
// their writer may still be at work, and reported through Notice with the
// command that removes them. It returns what it found.
func Clean(target string) []Leftover {
	prefix := tempPrefix(target)
	return clean(filepath.Dir(target), func(name string) (string, string, bool) {
		if !strings.HasPrefix(name, prefix) {
			return "", "", false
		}
		return target, name[len(prefix):], true
	})
}

// CleanDir does what Clean does for every target in dir at once: a batch
// that writes many outputs into dir calls it first, so temporary files of
// outputs it will not write again (a file since refused, another shard's)
// are dealt with too.
func CleanDir(dir string) []Leftover {
	return clean(dir, func(name string) (string, string, bool) {
		i := strings.LastIndex(name, ".tmp-")
		if !strings.HasPrefix(name, ".") || i < 1 {
			return "", "", false
		}
		return filepath.Join(dir, name[1:i]), name[i+len(".tmp-"):], true
	})
}

// clean handles the temporary files in dir that match reports: their
// target and the owner part of their name.
func clean(dir string, match func(name string) (target, owner string, ok bool)) []Leftover {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil
	}
	var out []Leftover
	for _, e := range ents {
		name := e.Name()
		target, owner, ok := match(name)
		if !ok || !e.Type().IsRegular() {
			continue
		}
		lo := Leftover{Path: filepath.Join(dir, name)}
		var mtime time.Time
		if fi, err := e.Info(); err == nil {
			lo.Bytes, mtime = fi.Size(), fi.ModTime()
		}
		host, pid, ok := parseOwner(owner)
		lo.Host, lo.PID = host, pid
		switch {
		case !ok:
			lo.Why = "its name does not say which process wrote it"
		case host != thisHost:
			lo.Why = fmt.Sprintf("written on host %s, where its process %d may still run", host, pid)
		case pid == os.Getpid():
			continue // this process's own, in use
		case !processGone(pid, mtime):
			lo.Why = fmt.Sprintf("process %d, which wrote it, is still running", pid)
		default:
			if err := os.Remove(lo.Path); err != nil && !errors.Is(err, os.ErrNotExist) {
				lo.Why = err.Error()
			} else {
				lo.Removed = true
			}
		}
		if lo.Removed {
			notice("removed %s (%d bytes), left by an interrupted run (process %d)", lo.Path, lo.Bytes, pid)
		} else {
			notice("%s (%d bytes) is a temporary file of an earlier write to %s, kept because %s; when no muarc writes there, remove it: rm -f -- %s",
				lo.Path, lo.Bytes, target, lo.Why, shellQuote(lo.Path))
		}
		out = append(out, lo)
	}
	return out
}

// shellQuote quotes s for a POSIX shell.
func shellQuote(s string) string {
	if s != "" && strings.Trim(s, "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789._/-+=:,@") == "" {
		return s
	}
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}

// ShellQuote quotes s for a POSIX shell, for messages that give a command.
func ShellQuote(s string) string { return shellQuote(s) }
