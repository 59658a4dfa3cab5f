package recfile

import (
	"encoding/json"
	"errors"
	"fmt"
	"regexp"
	"slices"
	"time"

	"muarc/h5"
	"muarc/internal/atomicfile"
	"muarc/internal/fieldbind"
	"muarc/record"
	"muarc/schema"
)

// Default sample chunk shape, 16384 rows (8 s at 2048 Hz) by 4 channels,
// and compression level 1 (libdeflate; its level 1 compressed these data as
// well as levels 2-6 and fastest). Measured on a 2-core machine for 64
// channels x 2048 Hz x 60 s float32 (LAYOUT.md, "Chunk shape"): narrow
// chunks keep a one-channel read to a sixteenth of the file while a band
// of 16 chunks still compresses on every core.
const (
	DefaultChunkRows = 16384
	DefaultChunkCols = 4
	DefaultDeflate   = 1
)

// WriteOptions tune Write. The zero value is the documented default.
type WriteOptions struct {
	// Overwrite replaces an existing file at the target path.
	Overwrite bool
	// DeflateLevel is the compression level 1-9 for samples (0 means
	// DefaultDeflate); every level writes standard zlib streams.
	DeflateLevel int
	// ChunkRows and ChunkCols set the sample chunk shape (0 = defaults).
	ChunkRows, ChunkCols int
	// Progress, when set, is called after each band of sample rows with the
	// rows written so far and the total over all arrays.
	Progress func(done, total int64)
	// Now sets the "created" time when the recording has none (tests);
	// zero means the current time.
	Now time.Time
	// DecodeSamples turns the raw chunk copy off (CopiesSamplesRaw):
	// every array's samples are decoded and encoded again (tests and
	// benchmarks compare the two paths).
	DecodeSamples bool
	// SamplesCopied, when set, is called for each array whose samples
	// were copied chunk by chunk from their source file (CopiesSamplesRaw),
	// with the trial's and array's positions (SameStoredSamples then
	// compares the copy with its source).
	SamplesCopied func(trial, array int)
}

// Write stores rec at path in layout v1. It writes a temporary file beside
// path and renames it into place after a sync, so path is either the old
// file (or absent) or the complete new one. It refuses an existing path
// unless opt.Overwrite. A full file system gives an
// *atomicfile.NoSpaceError naming path.
func Write(path string, rec *record.Recording, opt WriteOptions) error {
	if err := atomicfile.CheckTarget(path, opt.Overwrite); err != nil {
		return err
	}
	if err := check(rec); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	t, err := atomicfile.Create(path, opt.Overwrite)
	if err != nil {
		return err
	}
	if err := writeFile(t.Path, rec, opt); err != nil {
		return t.Abandon(fmt.Errorf("%s: %w", path, err))
	}
	return t.Publish()
}

// WriteInto stores rec in the file at tmp directly, replacing what it
// holds, with no temporary file of its own: for callers that hold an
// atomicfile.Temp and publish it themselves after further checks
// (de-identification scans its output first). The file keeps its mode
// (0600 for a Temp). Anything else should call Write.
func WriteInto(tmp string, rec *record.Recording, opt WriteOptions) error {
	if err := check(rec); err != nil {
		return err
	}
	return writeFile(tmp, rec, opt)
}

var nameRE = regexp.MustCompile(`^[A-Za-z0-9_][A-Za-z0-9_.\-]*$`)

// check refuses what the layout cannot hold, before anything is written.
func check(rec *record.Recording) error {
	if err := checkExtra("study", rec.Study.Extra, studyFields); err != nil {
		return err
	}
	if err := checkExtra("subject", rec.Subject.Extra, subjectFields); err != nil {
		return err
	}
	if err := checkExtra("session", rec.Session.Extra, sessionFields); err != nil {
		return err
	}
	seen := map[string]bool{}
	for ti, t := range rec.Trials {
		where := fmt.Sprintf("trial %d (%q)", ti, t.Name)
		if err := checkName(where, t.Name, seen); err != nil {
			return err
		}
		if err := checkExtra(where, t.Extra, trialFields); err != nil {
			return err
		}
		arrays := map[string]bool{}
		for ai, a := range t.Arrays {
			where := fmt.Sprintf("trial %q array %d (%q)", t.Name, ai, a.Name)
			if err := checkName(where, a.Name, arrays); err != nil {
				return err
			}
			if err := checkExtra(where, a.Extra, arrayFields); err != nil {
				return err
			}
			if a.Samples == nil {
				return invalid(where, "no samples")
			}
			_, ch := a.Samples.Shape()
			if ch <= 0 {
				return invalid(where, "samples have no channels")
			}
			if len(a.Channels) != ch {
				return invalid(where, "%d channel descriptions for %d sample columns", len(a.Channels), ch)
			}
			if a.SampleType != "" && a.SampleType != record.Float32 && a.SampleType != record.Float64 && !a.SampleType.IsInteger() {
				return invalid(where, "sample type %q (want float32, float64, int8, int16 or int32)", a.SampleType)
			}
			if a.SampleType.IsInteger() {
				if err := checkScale(where, &a); err != nil {
					return err
				}
			}
			decs := map[string]bool{}
			for di, d := range a.Decompositions {
				where := fmt.Sprintf("%s decomposition %d (%q)", where, di, d.Name)
				if err := checkName(where, d.Name, decs); err != nil {
					return err
				}
				if d.Parameters != "" && !json.Valid([]byte(d.Parameters)) {
					return invalid(where, "parameters are not valid JSON")
				}
				cols := map[string]bool{colID: true, colLabel: true, colDischargeN: true}
				for _, c := range unitColumns {
					cols[c] = true
				}
				for _, c := range d.ExtraColumns {
					if !nameRE.MatchString(c.Name) || cols[c.Name] {
						return invalid(where, "extra column name %q is empty, not a plain name, or taken", c.Name)
					}
					cols[c.Name] = true
					if (c.Values == nil) == (c.Text == nil) {
						return invalid(where, "extra column %q must have exactly one of Values and Text", c.Name)
					}
					if len(c.Values)+len(c.Text) != len(d.Units) {
						return invalid(where, "extra column %q has %d values for %d units", c.Name, len(c.Values)+len(c.Text), len(d.Units))
					}
				}
				if err := checkMUAPs(where, d.MUAPs, len(d.Units), ch); err != nil {
					return err
				}
				if err := checkDerived(where, &d, ch); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

func checkName(where, name string, seen map[string]bool) error {
	if !nameRE.MatchString(name) {
		return invalid(where, "name %q: use letters, digits, '_', '-' and '.', not starting with '-' or '.'", name)
	}
	if seen[name] {
		return invalid(where, "name %q used twice", name)
	}
	seen[name] = true
	return nil
}

func checkExtra(where string, x record.Extra, reserved []string) error {
	for k, v := range x {
		if !nameRE.MatchString(k) || slices.Contains(reserved, k) || k == attrListPosition {
			return invalid(where, "extra field %q is not a plain name or is a layout field", k)
		}
		switch v.(type) {
		case string, float64, int64, bool, []float64, []int64:
		default:
			return invalid(where, "extra field %q has type %T (want string, float64, int64, bool, []float64 or []int64)", k, v)
		}
	}
	return nil
}

// attrs collects attributes to write; absent values (NaN, "") are skipped.
type attrs []attrKV

type attrKV struct {
	k string
	v any
}

func (a *attrs) str(k, v string) {
	if v != "" {
		a.any(k, v)
	}
}

// fields appends the registry fields of group that the model struct *ptr
// holds (schema.Fields through internal/fieldbind), in registry order: a
// required one always, another when its value is known (not empty, not
// NaN, an optional integer not 0). Group names (KindName) are the HDF5
// link name, not an attribute.
func (a *attrs) fields(ptr any, group string) {
	for _, b := range fieldbind.Bind(ptr, group) {
		if b.Field.Kind == schema.KindName || !b.Field.Required && !b.Known() {
			continue
		}
		a.any(b.Name(), b.Get())
	}
}

func (a *attrs) any(k string, v any) { *a = append(*a, attrKV{k, v}) }

func (a attrs) write(g interface{ SetAttr(string, any) error }, extra record.Extra) error {
	for _, kv := range a {
		if err := g.SetAttr(kv.k, kv.v); err != nil {
			return err
		}
	}
	keys := make([]string, 0, len(extra))
	for k := range extra {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	for _, k := range keys {
		if err := g.SetAttr(k, extra[k]); err != nil {
			return err
		}
	}
	return nil
}

type writer struct {
	opt        WriteOptions
	done, rows int64
	trialPos   int // the trial being written (for SamplesCopied)
}

func writeFile(name string, rec *record.Recording, opt WriteOptions) (err error) {
	f, err := h5.Create(name)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := f.Close(); err == nil {
			err = cerr
		}
	}()
	root, err := f.Root()
	if err != nil {
		return err
	}
	defer root.Close()
	w := &writer{opt: opt}
	for _, t := range rec.Trials {
		for _, a := range t.Arrays {
			n, _ := a.Samples.Shape()
			w.rows += int64(n)
		}
	}
	created := rec.Created
	if created.IsZero() {
		created = opt.Now
		if created.IsZero() {
			created = time.Now()
		}
	}
	var ra attrs
	ra.any(attrLayout, schema.LayoutName)
	ra.any(attrVersion, schema.LayoutVersion)
	ra.any(attrCreated, created.UTC().Format(time.RFC3339Nano))
	software := rec.Software
	if software == "" {
		software = schema.Software
	}
	ra.any(attrSoftware, software)
	if err := ra.write(root, nil); err != nil {
		return err
	}
	s, p, e := rec.Study, rec.Subject, rec.Session
	for _, gr := range []struct {
		name  string
		ptr   any
		extra record.Extra
	}{{grpStudy, &s, s.Extra}, {grpSubject, &p, p.Extra}, {grpSession, &e, e.Extra}} {
		var a attrs
		a.fields(gr.ptr, gr.name)
		if err := group(root, gr.name, a, gr.extra); err != nil {
			return err
		}
	}
	trials, err := root.CreateGroup(grpTrials)
	if err != nil {
		return err
	}
	defer trials.Close()
	for i := range rec.Trials {
		w.trialPos = i
		if err := w.trial(trials, &rec.Trials[i], i); err != nil {
			return err
		}
	}
	if err := writeProvenance(root, rec.Provenance); err != nil {
		return err
	}
	// The metadata digest goes last, over what the file now holds.
	objs, err := f.Metadata()
	if err != nil {
		return err
	}
	return root.SetAttr(AttrMetadataSHA256, MetadataDigest(objs))
}

func group(parent *h5.Group, name string, a attrs, extra record.Extra) error {
	g, err := parent.CreateGroup(name)
	if err != nil {
		return err
	}
	defer g.Close()
	return a.write(g, extra)
}

func (w *writer) trial(parent *h5.Group, t *record.Trial, pos int) error {
	g, err := listMember(parent, t.Name, pos, t, "trial", t.Extra)
	if err != nil {
		return err
	}
	defer g.Close()
	if err := writeSignal(g, dsForce, t.Force); err != nil {
		return err
	}
	if err := writeSignal(g, dsForceTarget, t.ForceTarget); err != nil {
		return err
	}
	arrays, err := g.CreateGroup(grpArrays)
	if err != nil {
		return err
	}
	defer arrays.Close()
	for i := range t.Arrays {
		if err := w.array(arrays, &t.Arrays[i], i); err != nil {
			return err
		}
	}
	return nil
}

func writeSignal(g *h5.Group, name string, s record.Signal) error {
	if s.SamplingRateHz == 0 && len(s.Values) == 0 {
		return nil
	}
	if err := g.WriteColumn(name, s.Values); err != nil {
		return err
	}
	return datasetFields(g, name, &s, "signal")
}

// listMember creates the group of a trial, array or decomposition with
// its list position, the registry fields of group that *ptr holds and the
// extra fields; the caller closes it.
func listMember(parent *h5.Group, name string, pos int, ptr any, group string, extra record.Extra) (*h5.Group, error) {
	g, err := parent.CreateGroup(name)
	if err != nil {
		return nil, err
	}
	a := attrs{{attrListPosition, int64(pos)}}
	a.fields(ptr, group)
	if err := a.write(g, extra); err != nil {
		g.Close()
		return nil, err
	}
	return g, nil
}

// datasetFields writes the registry fields of group that *ptr holds as
// attributes of g's dataset name.
func datasetFields(g *h5.Group, name string, ptr any, group string) error {
	d, err := g.OpenDataset(name, 0)
	if err != nil {
		return err
	}
	defer d.Close()
	var a attrs
	a.fields(ptr, group)
	return a.write(d, nil)
}

func (w *writer) array(parent *h5.Group, ar *record.Array, pos int) error {
	g, err := listMember(parent, ar.Name, pos, ar, "array", ar.Extra)
	if err != nil {
		return err
	}
	defer g.Close()
	if err := w.samples(g, ar, pos); err != nil {
		return err
	}
	if err := writeChannels(g, ar.Channels); err != nil {
		return err
	}
	decs, err := g.CreateGroup(grpDecomps)
	if err != nil {
		return err
	}
	defer decs.Close()
	for i := range ar.Decompositions {
		if err := writeDecomposition(decs, &ar.Decompositions[i], i); err != nil {
			return err
		}
	}
	return nil
}

// samples streams the array's samples in bands of chunk height; a second
// goroutine reads the next band from the source while this one compresses.
// Samples read from a muarc file in the encoding they would be written
// with are copied chunk by chunk instead (copyRaw).
func (w *writer) samples(g *h5.Group, ar *record.Array, pos int) error {
	if src, level, ok := rawSource(ar, w.opt); ok {
		return w.copyRaw(g, ar, pos, src, level)
	}
	rows, cols := ar.Samples.Shape()
	f64 := ar.SampleType == record.Float64
	level := w.opt.DeflateLevel
	if level == 0 {
		level = DefaultDeflate
	}
	cr, cc := chunkShape(w.opt)
	if ar.SampleType.IsInteger() {
		return w.counts(g, ar, cr, cc, level)
	}
	mw, err := g.CreateMatrix(dsSamples, cols, f64, cr, cc, level)
	if err != nil {
		return err
	}
	defer mw.Close()
	type band struct {
		f32 []float32
		f64 []float64
	}
	var bufs [2]*band
	for i := range bufs {
		if f64 {
			bufs[i] = &band{f64: make([]float64, cr*cols)}
		} else {
			bufs[i] = &band{f32: make([]float32, cr*cols)}
		}
	}
	fill := func(b *band, r, n int) error {
		if f64 {
			b.f64 = b.f64[:n*cols]
			return ar.Samples.ReadFloat64(r, b.f64)
		}
		b.f32 = b.f32[:n*cols]
		return ar.Samples.ReadFloat32(r, b.f32)
	}
	err = readAhead(rows, cr, bufs, fill, func(b *band) error {
		var err error
		if f64 {
			err = mw.WriteBand64(b.f64)
		} else {
			err = mw.WriteBand32(b.f32)
		}
		if err == nil {
			w.rowsDone((len(b.f32) + len(b.f64)) / cols)
		}
		return err
	})
	if err != nil {
		return w.samplesErr(mw.Dataset().Path(), err)
	}
	if mw.Rows() != rows {
		return fmt.Errorf("%s: wrote %d of %d rows", mw.Dataset().Path(), mw.Rows(), rows)
	}
	return nil
}

// readAhead streams rows [0, rows) in bands of up to cr rows, two buffers
// deep: a goroutine fills the next band (fill reads rows [r, r+n) into b)
// while write takes the one before, in order. A fill error comes back as a
// *readError; the first error of either side stops both.
func readAhead[B any](rows, cr int, bufs [2]B, fill func(b B, r, n int) error, write func(b B) error) error {
	type band struct {
		b   B
		err error
	}
	free := make(chan B, 2)
	full := make(chan band, 2)
	free <- bufs[0]
	free <- bufs[1]
	stop := make(chan struct{})
	defer close(stop)
	go func() {
		defer close(full)
		for r := 0; r < rows; r += cr {
			var b B
			select {
			case b = <-free:
			case <-stop:
				return
			}
			err := fill(b, r, min(cr, rows-r))
			select {
			case full <- band{b, err}:
			case <-stop:
				return
			}
			if err != nil {
				return
			}
		}
	}()
	for x := range full {
		if x.err != nil {
			return &readError{x.err}
		}
		if err := write(x.b); err != nil {
			return err
		}
		free <- x.b
	}
	return nil
}

// readError marks an error of reading the samples a writer streams.
type readError struct{ err error }

func (e *readError) Error() string { return e.err.Error() }
func (e *readError) Unwrap() error { return e.err }

// samplesErr names the dataset in an error of streaming samples into it:
// a read error as "PATH: reading samples: ...", a write error as it is.
func (w *writer) samplesErr(path string, err error) error {
	var re *readError
	if errors.As(err, &re) {
		return fmt.Errorf("%s: reading samples: %w", path, re.err)
	}
	return err
}

// rowsDone counts n more rows written and reports progress.
func (w *writer) rowsDone(n int) {
	w.done += int64(n)
	if w.opt.Progress != nil {
		w.opt.Progress(w.done, w.rows)
	}
}

func filepathIsAbs(p string) bool {
	return len(p) > 0 && (p[0] == '/' || p[0] == '\\' || len(p) > 1 && p[1] == ':')
}
