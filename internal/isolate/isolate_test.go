package isolate

import (
	"encoding/json"
	"errors"
	"os"
	"strings"
	"sync"
	"testing"
	"time"
)

func init() {
	Register("test.echo", func(raw json.RawMessage) (any, error) {
		var s string
		err := json.Unmarshal(raw, &s)
		return map[string]any{"echo": s, "pid": os.Getpid()}, err
	})
	Register("test.fail", func(json.RawMessage) (any, error) { return nil, errors.New("refused: bad input") })
	Register("test.exit", func(json.RawMessage) (any, error) {
		os.Stderr.WriteString("about to go\n")
		os.Exit(3)
		return nil, nil
	})
	Register("test.hang", func(json.RawMessage) (any, error) {
		// A library stuck in a loop never answers. (A bare select{} would
		// not do: with every goroutine blocked the Go runtime ends the
		// worker as deadlocked, a crash rather than a hang.)
		for {
			time.Sleep(time.Hour)
		}
	})
	Register("test.crash", func(json.RawMessage) (any, error) {
		done := make(chan bool)
		go func() {
			var p *int
			*p = 1 // an unrecovered fault ends the process, as one in C does
			done <- true
		}()
		<-done
		return nil, nil
	})
}

func TestMain(m *testing.M) {
	Serve()
	os.Exit(m.Run())
}

type echo struct {
	Echo string `json:"echo"`
	PID  int    `json:"pid"`
}

// TestWorkersAreReusedAndReplaced: calls share the pool's workers (process
// start-up is paid once per worker), a worker that dies costs only its own
// call, and the next call gets a fresh worker.
func TestWorkersAreReusedAndReplaced(t *testing.T) {
	p, err := NewPool(2)
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	var wg sync.WaitGroup
	pids := sync.Map{}
	for i := 0; i < 40; i++ {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			var e echo
			if err := p.Call("test.echo", "x", &e); err != nil || e.Echo != "x" {
				t.Errorf("echo: %v %+v", err, e)
			}
			pids.Store(e.PID, true)
		}(i)
	}
	wg.Wait()
	n := 0
	pids.Range(func(any, any) bool { n++; return true })
	if n > 2 || p.Started() > 2 {
		t.Fatalf("40 calls used %d worker processes (%d started), want at most 2", n, p.Started())
	}
	if err := p.Call("test.fail", nil, nil); err == nil || err.Error() != "refused: bad input" {
		t.Fatalf("a handler's error: %v", err)
	}
	var ce *CrashError
	// A Go fault is a muarc bug, not the HDF5 library's: no Signal, the
	// dump's line in Detail (a fault inside C is tested in cmd/muarc).
	if err := p.Call("test.crash", nil, nil); !errors.As(err, &ce) || ce.Signal != "" || !strings.Contains(ce.Detail, "nil pointer dereference") {
		t.Fatalf("crash: %v (%#v)", err, ce)
	}
	if err := p.Call("test.exit", nil, nil); !errors.As(err, &ce) || !strings.Contains(ce.Detail, "about to go") {
		t.Fatalf("exit: %v (%#v)", err, ce)
	}
	var e echo
	if err := p.Call("test.echo", "after", &e); err != nil || e.Echo != "after" {
		t.Fatalf("after two deaths: %v %+v", err, e)
	}
	if err := p.Call("no.such", nil, nil); err == nil || !strings.Contains(err.Error(), "no handler") {
		t.Fatalf("unknown kind: %v", err)
	}
}

// TestStuckWorkerIsStopped: a call that never answers is stopped at the
// pool's time limit with a *TimeoutError naming the limit and the variable
// that raises it, and the next call gets a fresh worker.
func TestStuckWorkerIsStopped(t *testing.T) {
	p, err := NewPool(1)
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	p.SetCallLimit(300 * time.Millisecond)
	err = p.Call("test.hang", nil, nil)
	var te *TimeoutError
	if !errors.As(err, &te) || te.Limit != 300*time.Millisecond || !strings.Contains(err.Error(), EnvCallLimit) {
		t.Fatalf("want a TimeoutError after 300ms naming %s, got %v", EnvCallLimit, err)
	}
	var e echo
	if err := p.Call("test.echo", "after", &e); err != nil || e.Echo != "after" {
		t.Fatalf("the call after a stopped worker: %v %+v", err, e)
	}
	if p.Started() != 2 {
		t.Fatalf("want a fresh worker after the stuck one, started %d", p.Started())
	}
}

// TestCallLimitFromEnv: the variable takes Go durations and 0; anything
// else is refused with the variable named.
func TestCallLimitFromEnv(t *testing.T) {
	for v, want := range map[string]time.Duration{"": DefaultCallLimit, "0": 0, "90s": 90 * time.Second, "1h": time.Hour} {
		t.Setenv(EnvCallLimit, v)
		got, err := callLimitFromEnv()
		if err != nil || got != want {
			t.Errorf("%s=%q: got %v, %v; want %v", EnvCallLimit, v, got, err, want)
		}
	}
	for _, v := range []string{"ten minutes", "-5s", "12"} {
		t.Setenv(EnvCallLimit, v)
		if _, err := callLimitFromEnv(); err == nil || !strings.Contains(err.Error(), EnvCallLimit) {
			t.Errorf("%s=%q: want a refusal naming the variable, got %v", EnvCallLimit, v, err)
		}
	}
}
