package archive

import (
	"testing"
	"time"
)

func TestZZSummaries(t *testing.T) {
	start := time.Now()
	s, err := Summaries("/tmp/perf/s200", 1)
	t.Logf("%d %v %v", len(s), err, time.Since(start))
}
