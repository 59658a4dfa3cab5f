package validate

import (
	"errors"
	"fmt"
	"os"
	"runtime/debug"
	"strings"

	"muarc/h5"
	"muarc/internal/batch"
	"muarc/recfile"
)

// maxChunkFaults is how many damaged chunks of one dataset are reported one
// by one; the rest are counted in one more finding.
const maxChunkFaults = 20

// File validates one muarc file in this process (warning: a file damaged
// in its HDF5 metadata can crash the process; Isolated is the safe entry
// point): structure (File.Survey and the small integer datasets), the
// metadata digest, the metadata view against the JSON Schema
// (recfile.MetadataViewOf), the content checks on the recording
// (recfile.OpenHandle) and, when opt.ChecksumScan, every stored chunk's
// Fletcher-32 checksum (File.VerifyChunksOf) and the EMG samples for
// stored infinities (band by band, each chunk inflated once; with
// opt.SamplesReadByCaller only the samples' chunk index), all through
// one open handle of the file, whose object tree is walked once for the
// first two; memory does not grow with the recording's length. A file that
// cannot be read at all (missing, not HDF5,
// not a muarc recording, a newer major layout version) gives ReadError.
// File never panics on bad input.
func File(path string, opt Options) (rep *Report) {
	rep = &Report{File: path}
	if opt.Rules.isZero() {
		opt.Rules = DefaultRules()
	}
	var raw []Finding
	add := func(id, h, j, hint, format string, a ...any) {
		raw = append(raw, Finding{Severity: opt.Rules.severity(id), Check: id, Message: fmt.Sprintf(format, a...), HDF5Path: h, JSONPath: j, Hint: hint})
	}
	defer func() {
		if p := recover(); p != nil {
			rep.ReadError = fmt.Sprintf("internal error while validating (a muarc bug; please report it with the file): %v\n%s", p, debug.Stack())
		}
		rep.Findings = finish(raw, opt)
		sortFindings(rep.Findings)
		if rep.Findings == nil {
			rep.Findings = []Finding{}
		}
	}()

	if fi, err := os.Stat(path); err != nil {
		rep.ReadError = err.Error()
		return rep
	} else if fi.IsDir() {
		rep.ReadError = path + " is a folder, not a file"
		return rep
	}
	// One handle serves every check: the structure, the metadata digest,
	// the metadata view, the recording model and the chunk scan.
	hf, err := h5.Open(path)
	if err != nil {
		rep.ReadError = "cannot read as HDF5: " + err.Error()
		return rep
	}
	defer hf.Close()
	// One walk of the object tree gives the structure and what the
	// metadata digest covers.
	objs, meta, metaErr, err := hf.Survey()
	if err != nil {
		rep.ReadError = "cannot read as HDF5: " + err.Error()
		return rep
	}
	st := &structure{t: newTree(objs), add: add}
	if refuse := st.root(); refuse != "" {
		rep.ReadError = refuse
		return rep
	}
	st.readInt = intReaderFor(hf)
	st.check()
	st.unexpected()
	// Attributes and strings have no checksum in HDF5: the metadata digest
	// stands in for one.
	if metaErr != nil {
		readFailure(add, metaErr, errorCount(raw), "metadata digest")
	} else {
		checkMetadataIntegrity(meta, st.version, add)
	}
	// Metadata view against the schema.
	if view, err := recfile.MetadataViewOf(hf); err != nil {
		readFailure(add, err, errorCount(raw), "metadata view")
	} else {
		for _, f := range CheckMetadata(view) {
			f.Severity = opt.Rules.severity(f.Check)
			f.HDF5Path = recfile.HDF5Path(view, f.JSONPath)
			raw = append(raw, f)
		}
	}

	// Content checks on the model.
	var callerReads map[string]bool // sample datasets the caller reads (SamplesReadByCaller)
	if rf, err := recfile.OpenHandle(hf); err != nil {
		readFailure(add, err, errorCount(raw), "content")
	} else {
		rec := rf.Recording()
		raw = append(raw, CheckRecording(rec, opt.Rules)...)
		if opt.ChecksumScan {
			// The samples, band by band, for stored infinities (with the
			// scan that reads every chunk anyway).
			p := paths{rec}
			for ti := range rec.Trials {
				for ai := range rec.Trials[ti].Arrays {
					ah, aj := p.array(ti, ai)
					if opt.SamplesReadByCaller {
						if callerReads == nil {
							callerReads = map[string]bool{}
						}
						callerReads[ah+"/samples"] = true
						continue
					}
					checkSamplesInfinite(&rec.Trials[ti].Arrays[ai], ah, aj, add)
				}
			}
		}
		if err := rf.Close(); err != nil {
			add("content.read", "/", "", "the file may be damaged", "closing the file: %v", err)
		}
	}

	if opt.ChecksumScan {
		faults := map[string]int{}
		_, err := hf.VerifyChunksIndexOnly(objs, callerReads, func(c h5.ChunkFault) {
			faults[c.Dataset]++
			if faults[c.Dataset] > maxChunkFaults {
				return
			}
			where := "chunk at " + offsetText(c.Offset)
			if c.Offset == nil {
				where = "dataset"
			}
			add("checksum.chunk", c.Dataset, "", "the stored bytes changed since writing (disk fault or tampering): restore the file from a copy and check its SHA-256",
				"%s: %v", where, c.Err)
		})
		for ds, n := range faults {
			if n > maxChunkFaults {
				add("checksum.chunk", ds, "", "restore the file from a copy", "%d more damaged chunks not listed", n-maxChunkFaults)
			}
		}
		if err != nil {
			add("checksum.scan", "/", "", "the file may be damaged", "the chunk checksum scan failed: %v", err)
		}
	}
	return rep
}

func errorCount(fs []Finding) int {
	n := 0
	for _, f := range fs {
		if f.Severity == Error {
			n++
		}
	}
	return n
}

// readFailure turns a recfile error into a finding. When structural errors
// (or schema errors) already explain it, it is a note that the later checks
// did not run.
func readFailure(add addFunc, err error, structErrors int, what string) {
	obj, hint := "/", "the file may be damaged; the findings above say where"
	var fe *recfile.FormatError
	if errors.As(err, &fe) {
		obj = fe.Object
		if fe.Hint != "" {
			hint = fe.Hint
		}
	}
	var he *h5.Error
	if obj == "/" && errors.As(err, &he) && he.Object != "" {
		obj = he.Object
	}
	switch {
	case errors.Is(err, recfile.ErrChecksum):
		add("checksum.chunk", obj, "", "the stored bytes changed since writing: restore the file from a copy", "%s checks could not read the file: %v", what, err)
	case structErrors > 0:
		add("content.skipped", obj, "", hint, "%s checks did not run: %v", what, err)
	default:
		add("content.read", obj, "", hint, "%s checks could not read the file: %v", what, err)
	}
}

func offsetText(off []int) string {
	s := make([]string, len(off))
	for i, v := range off {
		s[i] = fmt.Sprint(v)
	}
	return "[" + strings.Join(s, ", ") + "]"
}

// intReaderFor reads whole integer datasets of an open file through h5.
func intReaderFor(f *h5.File) intReader {
	return func(p string) ([]int64, error) {
		root, err := f.Root()
		if err != nil {
			return nil, err
		}
		defer root.Close()
		d, err := root.OpenDataset(strings.TrimPrefix(p, "/"), 0)
		if err != nil {
			return nil, err
		}
		defer d.Close()
		return d.Int64s()
	}
}

// Validator validates one file; Files and other packages (archive's pack
// and verify, the report) call through it. It is File, in this process,
// unless a program installs Isolated, as the muarc command does, so that a
// file whose damaged HDF5 metadata crashes the HDF5 C library becomes that
// file's read error instead of ending the program (see Isolated and
// ServeWorker). Set it before any validation starts.
//
// Warning: with the default (File), a hostile or damaged file can end the
// whole process inside the HDF5 library; no Go code can recover from that.
var Validator func(path string, opt Options) *Report = File

// Files validates many files on workers goroutines (0: one per CPU),
// carrying on past bad files, and returns the reports in paths order. done,
// when not nil, is called after each file (serialised).
func Files(paths []string, opt Options, workers int, done func(i int, r *Report)) []*Report {
	reps := make([]*Report, len(paths))
	batch.Run(len(paths), workers, func(i int) error {
		reps[i] = Validator(paths[i], opt)
		if reps[i].Failed() {
			return errors.New("failed")
		}
		return nil
	}, func(i int, _ error) {
		if done != nil {
			done(i, reps[i])
		}
	})
	return reps
}
