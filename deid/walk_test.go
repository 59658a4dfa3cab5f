package deid

import (
	"strings"
	"testing"
	"time"

	"muarc/record"
)

// readerWithHandle stands for a sample reader whose exported fields hold
// things the layout never writes: a cache note and a pointer back to
// itself (a cycle a walk that entered it would never leave).
type readerWithHandle struct {
	record.MemSamples
	CacheNote string
	Self      *readerWithHandle
}

// The string walk of a recording covers what the file holds, not the
// concrete reader behind its samples: it ends, and the reader's own
// strings are not among the values searched.
func TestWalkStringsSkipsSampleReaders(t *testing.T) {
	src := &readerWithHandle{MemSamples: record.MemSamples{Samples: 1, Channels: 1, F32: []float32{1}}, CacheNote: "reader-internal-note"}
	src.Self = src
	rec := &record.Recording{Study: record.Study{ID: "st1"},
		Trials: []record.Trial{{Name: "t1", Arrays: []record.Array{{Name: "grid_a", Samples: src}}}}}
	var seen []string
	done := make(chan struct{})
	go func() {
		walkStrings(rec, func(path, s string) {
			if len(seen) < 1000 {
				seen = append(seen, path+"="+s)
			}
		})
		// seen is read only after done is closed.
		close(done)
	}()
	select {
	case <-done:
	case <-time.After(20 * time.Second):
		t.Fatal("the walk has not ended after 20 s: it follows the sample reader's pointer to itself")
	}
	all := strings.Join(seen, "\n")
	if strings.Contains(all, "reader-internal-note") {
		t.Errorf("the walk entered the sample reader:\n%s", all)
	}
	for _, want := range []string{"st1", "t1", "grid_a"} {
		if !strings.Contains(all, "="+want) {
			t.Errorf("the walk missed %q:\n%s", want, all)
		}
	}
}
