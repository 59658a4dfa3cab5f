package main

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"sync"
	"time"
)

// printJSON writes v as indented JSON and a newline.
func printJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	return enc.Encode(v)
}

// stderrIsTTY reports whether standard error is a terminal; progress is shown
// only then (never under CI or when redirected).
func stderrIsTTY() bool {
	fi, err := os.Stderr.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// progress is a one-line progress bar on stderr, drawn only on a terminal
// and at most ten times a second. It is safe for concurrent use.
type progress struct {
	mu    sync.Mutex
	label string
	total int64
	done  int64
	on    bool
	last  time.Time
	start time.Time
}

// newProgress starts a bar for total steps (files, bytes, ...).
func newProgress(label string, total int64) *progress {
	return &progress{label: label, total: total, on: stderrIsTTY(), start: time.Now()}
}

// Add advances the bar by n steps.
func (p *progress) Add(n int64) {
	if p == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	p.done += n
	if !p.on || time.Since(p.last) < 100*time.Millisecond && p.done < p.total {
		return
	}
	p.last = time.Now()
	p.draw()
}

func (p *progress) draw() {
	const width = 30
	frac := 1.0
	if p.total > 0 {
		frac = float64(p.done) / float64(p.total)
	}
	if frac > 1 {
		frac = 1
	}
	n := int(frac * width)
	bar := make([]byte, width)
	for i := range bar {
		if i < n {
			bar[i] = '='
		} else {
			bar[i] = ' '
		}
	}
	fmt.Fprintf(os.Stderr, "\r%s [%s] %3.0f%% %d/%d %.1fs", p.label, bar, 100*frac, p.done, p.total, time.Since(p.start).Seconds())
}

// Finish ends the bar's line.
func (p *progress) Finish() {
	if p == nil || !p.on {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	p.draw()
	fmt.Fprintln(os.Stderr)
}
