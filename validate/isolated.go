package validate

import (
	"encoding/json"
	"errors"

	"muarc/h5"
	"muarc/internal/isolate"
	"muarc/recfile"
)

// A damaged HDF5 file can crash the HDF5 C library itself (h5dump and h5py
// crash on such files too), and a crash inside C code ends the whole Go
// process: File, Files, recfile.Open and every reader of this module are
// exposed to it. The safe entry points run the reading in worker child
// processes instead (internal/isolate): Isolated validates one file, Screen
// tries the reads a command is about to make. A program that uses them
// must call ServeWorker first thing in main, because the workers are the
// program itself started again.

type fileArg struct {
	Path string  `json:"path"`
	Opt  Options `json:"options"`
}

type screenArg struct {
	Path   string `json:"path"`
	Chunks bool   `json:"chunks"`
}

func init() {
	isolate.Register("validate.file", func(raw json.RawMessage) (any, error) {
		var a fileArg
		if err := json.Unmarshal(raw, &a); err != nil {
			return nil, err
		}
		return File(a.Path, a.Opt), nil
	})
	isolate.Register("validate.screen", func(raw json.RawMessage) (any, error) {
		var a screenArg
		if err := json.Unmarshal(raw, &a); err != nil {
			return nil, err
		}
		return nil, screen(a.Path, a.Chunks)
	})
}

// ServeWorker makes this process a worker when it was started as one (it
// then never returns) and returns at once otherwise. Call it first thing
// in main before using Isolated or Screen.
func ServeWorker() { isolate.Serve() }

// Isolated validates path like File, in a worker process: a file that
// crashes the HDF5 library comes back with a ReadError naming the crash,
// and the caller goes on. Workers are kept and reused (one per CPU at
// most), so the cost per file is a round trip, not a process start.
func Isolated(path string, opt Options) *Report {
	pool, err := isolate.Default()
	if err != nil {
		return File(path, opt)
	}
	var rep Report
	err = pool.Call("validate.file", fileArg{path, opt}, &rep)
	if err != nil || rep.File != path {
		msg := "validation failed"
		if err != nil {
			msg = err.Error()
		}
		return &Report{File: path, Findings: []Finding{}, ReadError: msg}
	}
	return &rep
}

// Screen tries in a worker process the reads a command makes on a
// recording: the object tree with every attribute and string, the
// recording model and, when chunks, every stored chunk through its index.
// It returns a *isolate.CrashError when the HDF5 library crashed on the
// file and a *isolate.TimeoutError when the reads did not finish within the
// worker time limit (the caller must then not open it in its own process),
// and nil
// otherwise: ordinary read errors are left to the caller's own reading,
// which reports them with their context. It cannot prove that every later
// read is safe, only that the same library paths did not crash.
func Screen(path string, chunks bool) error {
	pool, err := isolate.Default()
	if err != nil {
		return nil
	}
	err = pool.Call("validate.screen", screenArg{path, chunks}, nil)
	var ce *isolate.CrashError
	if errors.As(err, &ce) {
		return ce
	}
	// A read that never finished in the worker would not finish in this
	// process either.
	var te *isolate.TimeoutError
	if errors.As(err, &te) {
		return te
	}
	return nil
}

// Screener, when not nil, is called by this module's packages before they
// open a recording in their own process (archive's index, pack and report
// summaries, the muarc commands that read one file); a non-nil error is
// that recording's error and it is not opened. It is nil by default: a
// library user reading untrusted files should set it to Screen (and call
// ServeWorker first thing in main), as the muarc command does. Without it
// a damaged file can end the whole process inside the HDF5 library.
var Screener func(path string, chunks bool) error

// ScreenFirst calls Screener when one is installed.
func ScreenFirst(path string, chunks bool) error {
	if Screener == nil {
		return nil
	}
	return Screener(path, chunks)
}

// IsCrash reports whether err (from Screen, or a Report's ReadError text)
// says the HDF5 library crashed on the file.
func IsCrash(err error) bool {
	var ce *isolate.CrashError
	return errors.As(err, &ce)
}

func screen(path string, chunks bool) error {
	hf, err := h5.Open(path)
	if err != nil {
		return err
	}
	defer hf.Close()
	if _, err := hf.Describe(); err != nil {
		return err
	}
	if _, err := hf.Metadata(); err != nil {
		return err
	}
	f, err := recfile.OpenHandle(hf)
	if err != nil {
		return err
	}
	f.Close()
	if chunks {
		_, err = hf.VerifyChunks(func(h5.ChunkFault) {})
	}
	return err
}
