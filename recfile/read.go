package recfile

import (
	"errors"
	"fmt"
	"math"
	"time"

	"muarc/h5"
	"muarc/internal/fieldbind"
	"muarc/record"
	"muarc/schema"
)

// File is an open muarc file. Its recording's Array.Samples read from the
// file until Close.
type File struct {
	path    string
	f       *h5.File
	rec     *record.Recording
	samples []*ArraySamples
	// borrowed is set when the h5 file was handed to OpenHandle: Close
	// leaves it open for its owner.
	borrowed bool
}

// Path is the file's path.
func (f *File) Path() string { return f.path }

// Recording returns the recording read by Open.
func (f *File) Recording() *record.Recording { return f.rec }

// Close closes the file; the recording's sample views stop working.
func (f *File) Close() error {
	var first error
	for _, s := range f.samples {
		if err := s.ds.Close(); err != nil && first == nil {
			first = err
		}
	}
	f.samples = nil
	if f.borrowed {
		return first
	}
	if err := f.f.Close(); err != nil && first == nil {
		first = err
	}
	return first
}

// Open reads a muarc file: every attribute, force, channels, discharges,
// unit tables and MUAPs; samples stay in the file behind Array.Samples. It
// refuses a file of a newer major layout version (ErrNewerLayout) and
// reports layout violations as *FormatError.
//
// Warning: Open reads in this process through the HDF5 C library, which a
// file with damaged HDF5 metadata can crash (Go cannot recover from that).
// For files from untrusted places, screen them first with validate.Screen
// (or validate them with validate.Isolated), which read in a worker process.
func Open(path string) (*File, error) {
	hf, err := h5.Open(path)
	if err != nil {
		return nil, err
	}
	f := &File{path: path, f: hf}
	if err := f.read(); err != nil {
		f.Close()
		return nil, err
	}
	return f, nil
}

// OpenHandle is Open on a file the caller already opened (validate reads
// one handle for all its checks). Close releases what OpenHandle opened and
// leaves hf open; the caller closes hf after it.
func OpenHandle(hf *h5.File) (*File, error) {
	f := &File{path: hf.Name(), f: hf, borrowed: true}
	if err := f.read(); err != nil {
		f.Close()
		return nil, err
	}
	return f, nil
}

// ReadAll reads a whole recording into memory, samples included (tests and
// small files; large recordings should use Open).
func ReadAll(path string) (*record.Recording, error) {
	f, err := Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	rec := f.rec
	for ti := range rec.Trials {
		for ai := range rec.Trials[ti].Arrays {
			a := &rec.Trials[ti].Arrays[ai]
			n, c := a.Samples.Shape()
			if cs, ok := a.Samples.(record.CountSource); ok {
				mc := &record.MemCounts{Samples: n, Channels: c, Counts: make([]int32, n*c), CountScale: cs.Scale()}
				if err := cs.ReadCounts(0, mc.Counts); err != nil {
					return nil, err
				}
				a.Samples = mc
				continue
			}
			m := &record.MemSamples{Samples: n, Channels: c}
			if a.SampleType == record.Float64 {
				m.F64 = make([]float64, n*c)
				err = a.Samples.ReadFloat64(0, m.F64)
			} else {
				m.F32 = make([]float32, n*c)
				err = a.Samples.ReadFloat32(0, m.F32)
			}
			if err != nil {
				return nil, err
			}
			a.Samples = m
		}
	}
	return rec, nil
}

// attrGet reads typed attributes of one object and remembers the first
// problem; names it was not asked for become Extra.
type attrGet struct {
	file, obj string
	m         map[string]h5.Attr
	used      map[string]bool
	err       error
}

func newAttrGet(file, obj string, as []h5.Attr) *attrGet {
	return &attrGet{file: file, obj: obj, m: h5.AttrMap(as), used: map[string]bool{}}
}

func (g *attrGet) bad(name, want string, a h5.Attr) {
	if g.err == nil {
		g.err = formatErr(g.file, g.obj, "rewrite the attribute with the type LAYOUT.md gives",
			"attribute %q is %s %v, want %s", name, a.Type, a.Shape, want)
	}
}

func (g *attrGet) str(name string) string {
	g.used[name] = true
	a, ok := g.m[name]
	if !ok {
		return ""
	}
	s, ok := a.Value.(string)
	if !ok {
		g.bad(name, "a string", a)
	}
	return s
}

func (g *attrGet) num(name string) float64 {
	g.used[name] = true
	a, ok := g.m[name]
	if !ok {
		return math.NaN()
	}
	switch v := a.Value.(type) {
	case float64:
		return v
	case int64:
		return float64(v)
	}
	g.bad(name, "a number", a)
	return math.NaN()
}

func (g *attrGet) int(name string) int {
	g.used[name] = true
	a, ok := g.m[name]
	if !ok {
		return 0
	}
	if v, ok := a.Value.(int64); ok {
		return int(v)
	}
	g.bad(name, "an integer", a)
	return 0
}

func (g *attrGet) boolean(name string) bool {
	g.used[name] = true
	a, ok := g.m[name]
	if !ok {
		return false
	}
	switch v := a.Value.(type) {
	case bool:
		return v
	case int64:
		return v != 0
	}
	g.bad(name, "a boolean", a)
	return false
}

func (g *attrGet) required(name string) {
	if _, ok := g.m[name]; !ok && g.err == nil {
		g.err = formatErr(g.file, g.obj, "LAYOUT.md lists the required attributes", "required attribute %q is missing", name)
	}
}

// fields reads the registry fields of group into the model struct *ptr
// (schema.Fields through internal/fieldbind), each with the type its kind
// gives; an absent one takes the model's "not known" (SetUnknown). Group
// names (KindName) are the HDF5 link name, not an attribute.
func (g *attrGet) fields(ptr any, group string) {
	for _, b := range fieldbind.Bind(ptr, group) {
		if b.Field.Kind == schema.KindName {
			continue
		}
		if _, ok := g.m[b.Name()]; !ok {
			g.used[b.Name()] = true
			b.SetUnknown()
			continue
		}
		var v any
		switch b.Field.Kind {
		case schema.KindNumber:
			v = g.num(b.Name())
		case schema.KindInteger:
			v = int64(g.int(b.Name()))
		case schema.KindBoolean:
			v = g.boolean(b.Name())
		default:
			v = g.str(b.Name())
		}
		if err := b.Set(v); err != nil && g.err == nil {
			g.err = err // the registry and the model disagree: a programming error
		}
	}
}

// extra returns the attributes nobody asked for.
func (g *attrGet) extra() record.Extra {
	var x record.Extra
	for k, a := range g.m {
		if g.used[k] {
			continue
		}
		if x == nil {
			x = record.Extra{}
		}
		switch v := a.Value.(type) {
		case string, float64, int64, bool, []float64, []int64:
			x[k] = v
		default:
			if g.err == nil {
				g.err = formatErr(g.file, g.obj, "extra attributes may be strings, numbers, booleans or 1-D numeric arrays", "attribute %q has type %s", k, a.Type)
			}
		}
	}
	return x
}

func (f *File) read() error {
	root, err := f.f.Root()
	if err != nil {
		return err
	}
	defer root.Close()
	as, err := root.Attrs()
	if err != nil {
		return err
	}
	ra := newAttrGet(f.path, "/", as)
	if layout := ra.str(attrLayout); layout != schema.LayoutName {
		return formatErr(f.path, "/", "is this a muarc file? `muarc inspect` shows what it holds", "root attribute layout is %q, want %q", layout, schema.LayoutName)
	}
	version := ra.str(attrVersion)
	if err := schema.CheckReadable(version); err != nil {
		fe := formatErr(f.path, "/", "", "%v", err)
		if major, _, perr := schema.ParseVersion(version); perr == nil && major > 1 {
			fe.err = ErrNewerLayout
		}
		return fe
	}
	rec := &record.Recording{LayoutVersion: version, Software: ra.str(attrSoftware)}
	if c := ra.str(attrCreated); c != "" {
		t, err := time.Parse(time.RFC3339Nano, c)
		if err != nil {
			return formatErr(f.path, "/", "write created as RFC 3339, e.g. 2026-03-14T09:30:00Z", "created %q is not an RFC 3339 time", c)
		}
		rec.Created = t
	}
	if ra.err != nil {
		return ra.err
	}
	f.rec = rec
	if err := f.readStudy(root, rec); err != nil {
		return err
	}
	trials, err := mustGroup(f.path, root, grpTrials)
	if err != nil {
		return err
	}
	defer trials.Close()
	kids, err := trials.Children()
	if err != nil {
		return err
	}
	for _, k := range kids {
		if k.Kind != h5.KindGroup {
			return formatErr(f.path, "/trials/"+k.Name, "only trial groups belong in /trials", "not a group")
		}
		t, err := f.readTrial(trials, k.Name)
		if err != nil {
			return err
		}
		rec.Trials = append(rec.Trials, t)
	}
	if root.Has(grpProvenance) {
		p, err := f.readProvenance(root)
		if err != nil {
			return err
		}
		rec.Provenance = p
	}
	return nil
}

func mustGroup(file string, parent *h5.Group, name string) (*h5.Group, error) {
	if !parent.Has(name) {
		p := parent.Path() + "/" + name
		if parent.Path() == "/" {
			p = "/" + name
		}
		return nil, formatErr(file, p, "LAYOUT.md lists the required groups", "required group is missing")
	}
	return parent.OpenGroup(name)
}

// openWithAttrs opens a subgroup and reads its attributes; the caller
// closes the group.
func openWithAttrs(file string, parent *h5.Group, name string) (*h5.Group, *attrGet, error) {
	g, err := parent.OpenGroup(name)
	if err != nil {
		return nil, nil, err
	}
	as, err := g.Attrs()
	if err != nil {
		g.Close()
		return nil, nil, err
	}
	return g, newAttrGet(file, g.Path(), as), nil
}

// openListMember is openWithAttrs for a trial, array or decomposition:
// its list_position attribute is known, not an extra (the reader follows
// creation order; validate checks that the two agree).
func openListMember(file string, parent *h5.Group, name string) (*h5.Group, *attrGet, error) {
	g, a, err := openWithAttrs(file, parent, name)
	if err == nil {
		a.int(attrListPosition)
	}
	return g, a, err
}

func groupAttrs(file string, parent *h5.Group, name string, optional bool) (*attrGet, error) {
	if optional && !parent.Has(name) {
		return newAttrGet(file, "/"+name, nil), nil
	}
	g, err := mustGroup(file, parent, name)
	if err != nil {
		return nil, err
	}
	defer g.Close()
	as, err := g.Attrs()
	if err != nil {
		return nil, err
	}
	return newAttrGet(file, g.Path(), as), nil
}

func (f *File) readStudy(root *h5.Group, rec *record.Recording) error {
	for _, gr := range []struct {
		name  string
		ptr   any
		extra *record.Extra
	}{{grpStudy, &rec.Study, &rec.Study.Extra}, {grpSubject, &rec.Subject, &rec.Subject.Extra}, {grpSession, &rec.Session, &rec.Session.Extra}} {
		a, err := groupAttrs(f.path, root, gr.name, false)
		if err != nil {
			return err
		}
		a.fields(gr.ptr, gr.name)
		*gr.extra = a.extra()
		if a.err != nil {
			return a.err
		}
	}
	return nil
}

func (f *File) readTrial(parent *h5.Group, name string) (record.Trial, error) {
	t := record.Trial{Name: name}
	g, a, err := openListMember(f.path, parent, name)
	if err != nil {
		return t, err
	}
	defer g.Close()
	a.fields(&t, "trial")
	t.Extra = a.extra()
	if a.err != nil {
		return t, a.err
	}
	if t.Force, err = f.readSignal(g, dsForce); err != nil {
		return t, err
	}
	if t.ForceTarget, err = f.readSignal(g, dsForceTarget); err != nil {
		return t, err
	}
	arrays, err := mustGroup(f.path, g, grpArrays)
	if err != nil {
		return t, err
	}
	defer arrays.Close()
	kids, err := arrays.Children()
	if err != nil {
		return t, err
	}
	for _, k := range kids {
		ar, err := f.readArray(arrays, k.Name)
		if err != nil {
			return t, err
		}
		t.Arrays = append(t.Arrays, ar)
	}
	return t, nil
}

func (f *File) readSignal(g *h5.Group, name string) (record.Signal, error) {
	var s record.Signal
	if !g.Has(name) {
		return s, nil
	}
	d, err := g.OpenDataset(name, 0)
	if err != nil {
		return s, err
	}
	defer d.Close()
	if len(d.Shape) != 1 {
		return s, formatErr(f.path, d.Path(), "store the trace as a 1-D float64 dataset", "shape %v is not 1-D", d.Shape)
	}
	as, err := d.Attrs()
	if err != nil {
		return s, err
	}
	a := newAttrGet(f.path, d.Path(), as)
	a.required(attrRate)
	a.fields(&s, "signal")
	if math.IsNaN(s.StartS) {
		s.StartS = 0
	}
	if a.err != nil {
		return s, a.err
	}
	s.Values, err = d.Float64s()
	return s, err
}

func (f *File) readArray(parent *h5.Group, name string) (record.Array, error) {
	ar := record.Array{Name: name}
	g, a, err := openListMember(f.path, parent, name)
	if err != nil {
		return ar, err
	}
	defer g.Close()
	a.required(attrRate)
	a.fields(&ar, "array")
	if math.IsNaN(ar.StartS) {
		ar.StartS = 0
	}
	ar.Extra = a.extra()
	if a.err != nil {
		return ar, a.err
	}
	if !g.Has(dsSamples) {
		return ar, formatErr(f.path, g.Path()+"/"+dsSamples, "every array holds its samples", "required dataset is missing")
	}
	d, err := g.OpenDataset(dsSamples, 0)
	if err != nil {
		return ar, err
	}
	chunk, _, lerr := d.Layout()
	d.Close()
	if lerr != nil {
		return ar, lerr
	}
	if len(d.Shape) != 2 || (d.Type != "float32" && d.Type != "float64" && !record.SampleType(d.Type).IsInteger()) {
		return ar, formatErr(f.path, d.Path(), "samples are a 2-D float32, float64, int8, int16 or int32 [sample, channel] matrix", "samples are %s %v", d.Type, d.Shape)
	}
	// Cache two bands of chunks across all channels, so block readers that
	// are not aligned to chunk rows still inflate each chunk once.
	cache := 1 << 20
	if len(chunk) == 2 {
		cache = max(cache, 2*chunk[0]*d.Shape[1]*elemSize(d.Type))
	}
	if d, err = g.OpenDataset(dsSamples, cache); err != nil {
		return ar, err
	}
	ar.SampleType = record.SampleType(d.Type)
	sv := &ArraySamples{ds: d, rows: d.Shape[0], cols: d.Shape[1]}
	f.samples = append(f.samples, sv)
	ar.Samples = sv
	if ar.SampleType.IsInteger() {
		if ar.Scale, err = f.readScale(d); err != nil {
			return ar, err
		}
		ar.Samples = &ArrayCounts{s: sv, scale: ar.Scale}
	}
	if ar.Channels, err = f.readChannels(g, sv.cols); err != nil {
		return ar, err
	}
	decs, err := mustGroup(f.path, g, grpDecomps)
	if err != nil {
		return ar, err
	}
	defer decs.Close()
	kids, err := decs.Children()
	if err != nil {
		return ar, err
	}
	for _, k := range kids {
		dec, err := f.readDecomposition(decs, k.Name, sv.cols)
		if err != nil {
			return ar, err
		}
		ar.Decompositions = append(ar.Decompositions, dec)
	}
	return ar, nil
}

// ArraySamples is the file-backed record.SampleSource of one array.
type ArraySamples struct {
	ds         *h5.Dataset
	rows, cols int
}

// Shape implements record.SampleSource.
func (s *ArraySamples) Shape() (int, int) { return s.rows, s.cols }

// ReadFloat32 implements record.SampleSource.
func (s *ArraySamples) ReadFloat32(start int, dst []float32) error {
	if len(dst)%s.cols != 0 {
		return errors.New("recfile: block is not whole rows")
	}
	return s.ds.ReadRect32(start, len(dst)/s.cols, 0, s.cols, dst)
}

// ReadFloat64 implements record.SampleSource.
func (s *ArraySamples) ReadFloat64(start int, dst []float64) error {
	if len(dst)%s.cols != 0 {
		return errors.New("recfile: block is not whole rows")
	}
	return s.ds.ReadRect64(start, len(dst)/s.cols, 0, s.cols, dst)
}

// ReadRange32 reads rows [row0, row0+rows) of channels [ch0, ch0+nch) into
// dst (row-major rows x nch). Only the chunks that hold them are read.
func (s *ArraySamples) ReadRange32(row0, rows, ch0, nch int, dst []float32) error {
	if row0 < 0 || rows < 0 || ch0 < 0 || nch < 0 || row0+rows > s.rows || ch0+nch > s.cols {
		return fmt.Errorf("recfile: range rows %d+%d channels %d+%d outside %dx%d", row0, rows, ch0, nch, s.rows, s.cols)
	}
	return s.ds.ReadRect32(row0, rows, ch0, nch, dst)
}

// ReadRange64 is ReadRange32 for float64.
func (s *ArraySamples) ReadRange64(row0, rows, ch0, nch int, dst []float64) error {
	if row0 < 0 || rows < 0 || ch0 < 0 || nch < 0 || row0+rows > s.rows || ch0+nch > s.cols {
		return fmt.Errorf("recfile: range rows %d+%d channels %d+%d outside %dx%d", row0, rows, ch0, nch, s.rows, s.cols)
	}
	return s.ds.ReadRect64(row0, rows, ch0, nch, dst)
}

// labelsInLayout reports whether units/label is the unit label column in a
// file of layout version v (since 1.1).
func labelsInLayout(v string) bool {
	major, minor, err := schema.ParseVersion(v)
	return err == nil && (major > 1 || minor >= 1)
}
