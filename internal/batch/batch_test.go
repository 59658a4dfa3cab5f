package batch

import (
	"errors"
	"fmt"
	"slices"
	"sync/atomic"
	"testing"
)

func TestShardsAreDisjointAndCover(t *testing.T) {
	var items []string
	for i := 0; i < 23; i++ {
		items = append(items, fmt.Sprintf("rec%02d.h5", (i*7)%23))
	}
	seen := map[string]int{}
	for i := 1; i <= 4; i++ {
		s, err := ParseShard(fmt.Sprintf("%d/4", i))
		if err != nil {
			t.Fatal(err)
		}
		for _, it := range s.Select(items) {
			seen[it]++
		}
	}
	if len(seen) != 23 {
		t.Fatalf("shards cover %d of 23", len(seen))
	}
	for k, n := range seen {
		if n != 1 {
			t.Fatalf("%s in %d shards", k, n)
		}
	}
	for _, bad := range []string{"0/4", "5/4", "a/b", "3", "1/0"} {
		if _, err := ParseShard(bad); err == nil {
			t.Errorf("ParseShard(%q) accepted", bad)
		}
	}
	if s, _ := ParseShard(""); s != All || !slices.Equal(s.Select([]string{"b", "a"}), []string{"a", "b"}) {
		t.Fatal("empty shard is not All")
	}
}

func TestRunCarriesOnPastFailures(t *testing.T) {
	var calls, dones atomic.Int32
	errs := Run(10, 3, func(i int) error {
		calls.Add(1)
		if i%4 == 1 {
			return errors.New("bad")
		}
		return nil
	}, func(int, error) { dones.Add(1) })
	failed := 0
	for i, err := range errs {
		if (err != nil) != (i%4 == 1) {
			t.Fatalf("job %d: %v", i, err)
		}
		if err != nil {
			failed++
		}
	}
	if calls.Load() != 10 || dones.Load() != 10 || failed != 3 {
		t.Fatalf("calls %d dones %d failed %d", calls.Load(), dones.Load(), failed)
	}
}
