// The resume cache: what an interrupted pack already checked, copied and hashed.

package archive

import (
	"bufio"
	"encoding/json"
	"errors"
	"io"
	"os"
	"sync"
)

// cacheKey identifies a file's state: same path, size and modification
// time means the earlier hash and checks still hold.
type cacheKey struct {
	path    string
	bytes   int64
	mtimeNs int64
}

// fixityCache holds FileRecords by cacheKey. On disk it is JSON Lines, one
// FileRecord per line, appended as each file finishes; a torn last line
// (an interrupted write) is ignored.
type fixityCache struct {
	mu sync.Mutex
	m  map[cacheKey]FileRecord
	w  *os.File
}

func newFixityCache() *fixityCache { return &fixityCache{m: map[cacheKey]FileRecord{}} }

func (c *fixityCache) get(path string, size, mtime int64) (FileRecord, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	f, ok := c.m[cacheKey{path, size, mtime}]
	return f, ok
}

func (c *fixityCache) put(f FileRecord) {
	c.mu.Lock()
	c.m[cacheKey{f.Path, f.Bytes, f.MtimeNs}] = f
	c.mu.Unlock()
}

// load reads a cache file; a missing file is an empty cache.
func (c *fixityCache) load(path string) error {
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	defer f.Close()
	return c.loadFrom(f)
}

// loadFrom reads cache lines from r; lines that do not parse (a torn last
// line) are ignored, since the cache only saves work.
func (c *fixityCache) loadFrom(rd io.Reader) error {
	r := bufio.NewReader(rd)
	for {
		line, err := r.ReadBytes('\n')
		if len(line) > 0 && line[len(line)-1] == '\n' {
			var rec FileRecord
			if json.Unmarshal(line, &rec) == nil && rec.Path != "" && (rec.SHA256 == "" || isHex64(rec.SHA256)) {
				c.put(rec)
			}
		}
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
	}
}

// openAppend opens the cache file for appending new records.
func (c *fixityCache) openAppend(path string) error {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_APPEND, 0o600)
	if err != nil {
		return err
	}
	c.w = f
	return nil
}

// record adds f and appends it to the file, synced, so an interruption just
// after loses nothing. Callers serialise calls.
func (c *fixityCache) record(f FileRecord) error {
	c.put(f)
	if c.w == nil {
		return nil
	}
	line, err := json.Marshal(f)
	if err != nil {
		return err
	}
	if _, err := c.w.Write(append(line, '\n')); err != nil {
		return err
	}
	return c.w.Sync()
}

func (c *fixityCache) close() error {
	if c.w == nil {
		return nil
	}
	err := c.w.Close()
	c.w = nil
	return err
}

func isHex64(s string) bool {
	if len(s) != 64 {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f') {
			return false
		}
	}
	return true
}

func (c *fixityCache) putSync(mu *sync.Mutex, f FileRecord) error {
	mu.Lock()
	defer mu.Unlock()
	return c.record(f)
}
