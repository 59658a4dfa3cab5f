// Package isolate runs work on untrusted files in worker child processes,
// so that a file damaged badly enough to crash the HDF5 C library (which
// Go cannot recover from: a fault inside C code ends the whole process)
// ends as that file's error instead of ending the run.
//
// A worker is the running executable started again with the environment
// variable MUARC_ISOLATE_WORKER=1; it must call Serve first thing in main
// (or TestMain), and it serves every kind of work that a package of the
// program registered with Register. A Pool keeps up to Max workers alive
// and gives each call to an idle one, so process start-up is paid once per
// worker, not once per file; a worker that dies is replaced by a fresh one
// for the next call, and the call it was serving returns a *CrashError.
//
// A call that does not finish within the pool's time limit (a file whose
// damaged metadata sends the C library into an endless loop) has its
// worker killed and returns a *TimeoutError; the limit is generous by
// default (DefaultCallLimit) and set by MUARC_WORKER_TIME_LIMIT.
//
// Requests and results travel as JSON lines on the worker's standard input
// and output; its standard error is kept to explain a crash.
package isolate

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"regexp"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"
)

// DefaultCallLimit is the longest one call may take in a worker before the
// worker is killed. It is far above what reading any real recording takes
// here (validating a 1 GB recording: about 1.3 s), so that it only ever
// stops a worker that is stuck.
const DefaultCallLimit = 10 * time.Minute

// EnvCallLimit names the environment variable that sets the time limit of
// one call, as a Go duration ("90s", "20m"); "0" turns the limit off.
const EnvCallLimit = "MUARC_WORKER_TIME_LIMIT"

// EnvWorker is set in a worker's environment.
const EnvWorker = "MUARC_ISOLATE_WORKER"

// Handler does one kind of work in a worker: it decodes arg and returns a
// value that is sent back as JSON.
type Handler func(arg json.RawMessage) (any, error)

var (
	regMu    sync.Mutex
	handlers = map[string]Handler{}
)

// Register makes kind available in workers; call it from an init function
// so that every process of the program knows it.
func Register(kind string, h Handler) {
	regMu.Lock()
	defer regMu.Unlock()
	if _, dup := handlers[kind]; dup {
		panic("isolate: kind registered twice: " + kind)
	}
	handlers[kind] = h
}

func handler(kind string) Handler {
	regMu.Lock()
	defer regMu.Unlock()
	return handlers[kind]
}

type request struct {
	Kind string          `json:"kind"`
	Arg  json.RawMessage `json:"arg"`
}

type response struct {
	Result json.RawMessage `json:"result,omitempty"`
	Err    string          `json:"err,omitempty"`
}

// IsWorker reports whether this process was started as a worker.
func IsWorker() bool { return os.Getenv(EnvWorker) == "1" }

// Serve returns at once in a normal process. In a worker it serves
// requests from standard input until it closes, then exits the process.
func Serve() {
	if !IsWorker() {
		return
	}
	in := bufio.NewReaderSize(os.Stdin, 1<<16)
	out := bufio.NewWriter(os.Stdout)
	for {
		line, err := in.ReadBytes('\n')
		if len(line) == 0 && err != nil {
			os.Exit(0)
		}
		var req request
		var resp response
		if err := json.Unmarshal(line, &req); err != nil {
			resp.Err = "isolate: bad request: " + err.Error()
		} else if h := handler(req.Kind); h == nil {
			resp.Err = "isolate: no handler for " + req.Kind
		} else {
			resp = run(h, req.Arg)
		}
		b, _ := json.Marshal(resp)
		out.Write(b)
		out.WriteByte('\n')
		if err := out.Flush(); err != nil {
			os.Exit(1)
		}
	}
}

func run(h Handler, arg json.RawMessage) (resp response) {
	defer func() {
		if p := recover(); p != nil {
			resp = response{Err: fmt.Sprintf("internal error (a muarc bug; please report it with the file): %v", p)}
		}
	}()
	v, err := h(arg)
	if err != nil {
		return response{Err: err.Error()}
	}
	b, err := json.Marshal(v)
	if err != nil {
		return response{Err: "isolate: result: " + err.Error()}
	}
	return response{Result: b}
}

// CrashError is returned by Pool.Call when the worker died serving the
// call (a fault inside C code, a fatal signal, or an exit).
type CrashError struct {
	// Signal names the fatal signal ("SIGSEGV"), empty when the worker
	// exited without one.
	Signal string
	// Detail is the last line the worker wrote to standard error, or how
	// it ended.
	Detail string
}

func (e *CrashError) Error() string {
	if e.Signal != "" {
		return "the HDF5 library crashed reading it (" + e.Signal + "); the file's HDF5 metadata is damaged: restore it from a copy"
	}
	return "the worker process reading it ended unexpectedly: " + e.Detail
}

// TimeoutError is returned by Pool.Call when the call did not finish within
// the pool's time limit; its worker was killed.
type TimeoutError struct{ Limit time.Duration }

func (e *TimeoutError) Error() string {
	return fmt.Sprintf("reading it did not finish within %v, so the worker was stopped: the file's HDF5 metadata may be damaged so that the library loops; if the file is just very large, raise the limit with %s (e.g. %s=1h)",
		e.Limit, EnvCallLimit, EnvCallLimit)
}

// Pool runs calls in up to Max worker processes.
type Pool struct {
	max   int
	limit time.Duration
	exe   string
	mu    sync.Mutex
	cond  *sync.Cond
	idle  []*worker
	live  int
	calls int64
	start int64
}

// NewPool makes a pool of at most max workers (max <= 0: one per CPU) of
// the running executable.
func NewPool(max int) (*Pool, error) {
	exe, err := os.Executable()
	if err != nil {
		return nil, err
	}
	if max <= 0 {
		max = runtime.NumCPU()
	}
	limit, err := callLimitFromEnv()
	if err != nil {
		return nil, err
	}
	p := &Pool{max: max, exe: exe, limit: limit}
	p.cond = sync.NewCond(&p.mu)
	return p, nil
}

func callLimitFromEnv() (time.Duration, error) {
	v := strings.TrimSpace(os.Getenv(EnvCallLimit))
	if v == "" {
		return DefaultCallLimit, nil
	}
	if v == "0" {
		return 0, nil
	}
	d, err := time.ParseDuration(v)
	if err != nil || d < 0 {
		return 0, fmt.Errorf("%s=%q: want a duration such as 90s or 20m, or 0 for no limit", EnvCallLimit, v)
	}
	return d, nil
}

// SetCallLimit sets the longest one call may take (0: no limit).
func (p *Pool) SetCallLimit(d time.Duration) {
	p.mu.Lock()
	p.limit = d
	p.mu.Unlock()
}

var (
	defaultOnce sync.Once
	defaultPool *Pool
	defaultErr  error
)

// Default is the process-wide pool (one worker per CPU at most), made on
// first use.
func Default() (*Pool, error) {
	defaultOnce.Do(func() { defaultPool, defaultErr = NewPool(0) })
	return defaultPool, defaultErr
}

// Started is how many worker processes the pool has started so far.
func (p *Pool) Started() int64 {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.start
}

type worker struct {
	cmd    *exec.Cmd
	in     io.WriteCloser
	out    *bufio.Reader
	stderr *limitedBuffer
}

// Call runs kind with arg in a worker and decodes its result into out
// (a pointer, or nil). An error the handler returned comes back as an
// error with its text; a worker that died gives a *CrashError.
func (p *Pool) Call(kind string, arg any, out any) error {
	a, err := json.Marshal(arg)
	if err != nil {
		return err
	}
	req, _ := json.Marshal(request{Kind: kind, Arg: a})
	req = append(req, '\n')
	w, err := p.get()
	if err != nil {
		return err
	}
	w.stderr.Reset()
	p.mu.Lock()
	limit := p.limit
	p.mu.Unlock()
	var expired atomic.Bool
	var timer *time.Timer
	if limit > 0 {
		timer = time.AfterFunc(limit, func() {
			expired.Store(true)
			w.cmd.Process.Kill()
		})
	}
	var resp response
	_, werr := w.in.Write(req)
	var line []byte
	if werr == nil {
		line, werr = w.out.ReadBytes('\n')
	}
	if werr == nil {
		werr = json.Unmarshal(line, &resp)
	}
	if timer != nil && !timer.Stop() && werr == nil {
		// The answer came just as the limit struck: keep the answer, but
		// the worker is being killed, so do not reuse it.
		w.kill()
		p.drop()
		return decode(resp, out)
	}
	if werr != nil {
		crash := w.kill()
		p.drop()
		if expired.Load() {
			return &TimeoutError{Limit: limit}
		}
		return crash
	}
	p.put(w)
	return decode(resp, out)
}

// decode gives a worker's answer: its error, or its result decoded into
// out (when not nil).
func decode(resp response, out any) error {
	if resp.Err != "" {
		return errors.New(resp.Err)
	}
	if out != nil {
		return json.Unmarshal(resp.Result, out)
	}
	return nil
}

func (p *Pool) get() (*worker, error) {
	p.mu.Lock()
	for len(p.idle) == 0 && p.live >= p.max {
		p.cond.Wait()
	}
	if n := len(p.idle); n > 0 {
		w := p.idle[n-1]
		p.idle = p.idle[:n-1]
		p.mu.Unlock()
		return w, nil
	}
	p.live++
	p.start++
	p.mu.Unlock()
	w, err := p.spawn()
	if err != nil {
		p.drop()
		return nil, err
	}
	return w, nil
}

func (p *Pool) put(w *worker) {
	p.mu.Lock()
	p.idle = append(p.idle, w)
	p.mu.Unlock()
	p.cond.Signal()
}

func (p *Pool) drop() {
	p.mu.Lock()
	p.live--
	p.mu.Unlock()
	p.cond.Signal()
}

func (p *Pool) spawn() (*worker, error) {
	cmd := exec.Command(p.exe)
	cmd.Env = append(os.Environ(), EnvWorker+"=1")
	in, err := cmd.StdinPipe()
	if err != nil {
		return nil, err
	}
	outPipe, err := cmd.StdoutPipe()
	if err != nil {
		return nil, err
	}
	w := &worker{cmd: cmd, in: in, out: bufio.NewReaderSize(outPipe, 1<<16), stderr: &limitedBuffer{max: 64 << 10}}
	cmd.Stderr = w.stderr
	if err := cmd.Start(); err != nil {
		return nil, fmt.Errorf("starting a worker process: %w", err)
	}
	return w, nil
}

// kill ends a worker that failed and says why it died.
func (w *worker) kill() *CrashError {
	w.in.Close()
	err := w.cmd.Wait()
	dump := w.stderr.String()
	ce := &CrashError{Signal: crashSignal(dump), Detail: lastLine(dump)}
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		if ws, ok := ee.Sys().(syscall.WaitStatus); ok && ws.Signaled() && ce.Signal == "" {
			ce.Signal = signalName(ws.Signal())
		}
	}
	if ce.Detail == "" {
		ce.Detail = fmt.Sprint(err)
	}
	return ce
}

// Close ends the idle workers; calls in flight finish first.
func (p *Pool) Close() {
	p.mu.Lock()
	idle := p.idle
	p.idle = nil
	p.live -= len(idle)
	p.mu.Unlock()
	for _, w := range idle {
		w.in.Close()
		w.cmd.Wait()
	}
}

var sigRE = regexp.MustCompile(`\bSIG[A-Z]+\b`)

// crashSignal finds the signal in a Go runtime crash dump ("SIGSEGV:
// segmentation violation", "[signal SIGSEGV: ...]", "fatal error:
// unexpected signal", "signal arrived during cgo execution").
func crashSignal(dump string) string {
	if !strings.Contains(dump, "signal arrived during cgo execution") && !strings.Contains(dump, "unexpected signal") &&
		!strings.HasPrefix(strings.TrimSpace(dump), "SIG") && !strings.Contains(dump, "\nSIG") {
		return ""
	}
	if m := sigRE.FindString(dump); m != "" {
		return m
	}
	return "a fatal signal"
}

func signalName(s os.Signal) string {
	if sig, ok := s.(syscall.Signal); ok {
		switch sig {
		case syscall.SIGSEGV:
			return "SIGSEGV"
		case syscall.SIGBUS:
			return "SIGBUS"
		case syscall.SIGABRT:
			return "SIGABRT"
		case syscall.SIGFPE:
			return "SIGFPE"
		case syscall.SIGKILL:
			return "SIGKILL"
		case syscall.SIGILL:
			return "SIGILL"
		}
	}
	return s.String()
}

func lastLine(s string) string {
	// A Go crash dump's first line says what happened; elsewhere the last
	// line is the message.
	s = strings.TrimSpace(s)
	if strings.HasPrefix(s, "panic: ") {
		s, _, _ = strings.Cut(s, "\n")
	}
	if i := strings.Index(s, "\ngoroutine "); i >= 0 {
		s = strings.TrimSpace(s[:i])
	}
	if i := strings.LastIndexByte(s, '\n'); i >= 0 {
		s = s[i+1:]
	}
	if len(s) > 300 {
		s = s[:300] + "..."
	}
	return s
}

// limitedBuffer keeps the first max bytes written to it.
type limitedBuffer struct {
	mu  sync.Mutex
	max int
	b   bytes.Buffer
}

func (l *limitedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	if room := l.max - l.b.Len(); room > 0 {
		if len(p) > room {
			l.b.Write(p[:room])
		} else {
			l.b.Write(p)
		}
	}
	return len(p), nil
}

func (l *limitedBuffer) Reset() {
	l.mu.Lock()
	l.b.Reset()
	l.mu.Unlock()
}

func (l *limitedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}
