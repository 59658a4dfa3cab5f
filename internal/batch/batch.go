// Package batch runs one job per input across a bounded number of workers,
// carrying on past failures, and selects one shard of a list of inputs so
// that a cluster job array can split a study over machines.
package batch

import (
	"fmt"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync"
)

// Shard is the i-th of n parts (1-based i, as job-array task ids usually are).
type Shard struct{ I, N int }

// All is the shard that selects everything.
var All = Shard{1, 1}

// ParseShard reads "i/n" with 1 <= i <= n; an empty string is All.
func ParseShard(s string) (Shard, error) {
	if s == "" {
		return All, nil
	}
	a, b, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(strings.TrimSpace(a))
	n, err2 := strconv.Atoi(strings.TrimSpace(b))
	if !ok || err1 != nil || err2 != nil || n < 1 || i < 1 || i > n {
		return All, fmt.Errorf("--shard %q: want i/n with 1 <= i <= n, e.g. 3/8", s)
	}
	return Shard{i, n}, nil
}

// Select returns the items of this shard. Items are sorted first so every
// machine sees the same order; item k (0-based, after sorting) goes to shard
// k mod N + 1. The shards of one list are disjoint and cover it.
func (s Shard) Select(items []string) []string {
	sorted := append([]string(nil), items...)
	sort.Strings(sorted)
	if s.N <= 1 {
		return sorted
	}
	var out []string
	for k, it := range sorted {
		if k%s.N == s.I-1 {
			out = append(out, it)
		}
	}
	return out
}

// String gives "i/n".
func (s Shard) String() string { return fmt.Sprintf("%d/%d", s.I, s.N) }

// Workers returns n when n > 0, else the number of usable CPUs.
func Workers(n int) int {
	if n > 0 {
		return n
	}
	return runtime.GOMAXPROCS(0)
}

// Run calls job(i) for i in [0, n) on up to workers goroutines and returns the
// errors by index (nil where the job succeeded). It never stops early: one
// bad input does not stop the others. done, when not nil, is called after
// each job (from the worker goroutine, serialised).
func Run(n, workers int, job func(i int) error, done func(i int, err error)) []error {
	errs := make([]error, n)
	next := make(chan int)
	var wg sync.WaitGroup
	var mu sync.Mutex
	for w := 0; w < Workers(workers) && w < n; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				err := job(i)
				errs[i] = err
				if done != nil {
					mu.Lock()
					done(i, err)
					mu.Unlock()
				}
			}
		}()
	}
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	wg.Wait()
	return errs
}
