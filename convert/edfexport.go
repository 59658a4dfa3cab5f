package convert

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"muarc/deid"
	"muarc/edfplus"
	"muarc/internal/atomicfile"
	"muarc/recfile"
	"muarc/record"
)

// EDFExportOptions say how ExportEDF writes.
type EDFExportOptions struct {
	// Format is edfplus.BDF (BDF+, 24-bit) or edfplus.EDF (EDF+, 16-bit).
	Format edfplus.Format
	// Dir is the output folder; files are <Dir>/<trial>.bdf or .edf.
	Dir string
	// AllowIdentified writes a recording that still carries identifying
	// fields (deid.IdentifyingFields); refused otherwise.
	AllowIdentified bool
	Overwrite       bool
}

// EDFSignalReport says where one signal of an exported file came from and
// how much rounding to the digital grid changed it.
type EDFSignalReport struct {
	Label   string `json:"label"`
	Source  string `json:"source"` // "ARRAY/CHANNEL", "force" or "force_target"
	Unit    string `json:"unit"`
	Renamed bool   `json:"renamed,omitempty"`
	// StepSize is the physical value of one digital step; MaxAbsError the
	// largest |written - stored| over the signal's samples, in Unit.
	StepSize    float64 `json:"step"`
	MaxAbsError float64 `json:"max_abs_error"`
	// Exact is true when the array's own EDF/BDF calibration was reused
	// and every sample was written without rounding.
	Exact bool `json:"exact,omitempty"`
}

// EDFFileReport is one written file.
type EDFFileReport struct {
	File            string            `json:"file"`
	Trial           string            `json:"trial"`
	Format          string            `json:"format"`
	RecordDurationS float64           `json:"record_duration_s"`
	Records         int               `json:"records"`
	Annotations     int               `json:"annotations"`
	Discharges      int               `json:"discharges"`
	Signals         []EDFSignalReport `json:"signals"`
	Warnings        []string          `json:"warnings,omitempty"`
}

// Transducer texts that tell an import where a signal belongs (the
// transducer field is free text in EDF; this is muarc's convention).
const (
	transducerArray       = "sEMG array "
	transducerChannel     = " channel "
	transducerForce       = "force"
	transducerForceTarget = "force target"
	// samplesEndText marks, as an annotation, where a signal's samples end
	// when its last record was padded: "samples end: NAME".
	samplesEndText = "samples end: "
)

// ExportEDF writes every trial of a muarc file as one EDF+ or BDF+ file.
func ExportEDF(path string, opt EDFExportOptions) ([]EDFFileReport, error) {
	f, err := recfile.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	rec := f.Recording()
	if left := deid.IdentifyingFields(rec); len(left) > 0 && !opt.AllowIdentified {
		more := ""
		if len(left) > 6 {
			left, more = left[:6], fmt.Sprintf(" and %d more", len(left)-6)
		}
		return nil, &ParseError{File: path, Msg: fmt.Sprintf("the recording still carries identifying fields: %s%s", strings.Join(left, ", "), more),
			Hint: "de-identify it first (muarc deidentify), or give --allow-identified for a file that stays inside the lab"}
	}
	if err := os.MkdirAll(opt.Dir, 0o755); err != nil {
		return nil, err
	}
	var reps []EDFFileReport
	for ti := range rec.Trials {
		ext := ".bdf"
		if opt.Format == edfplus.EDF {
			ext = ".edf"
		}
		out := filepath.Join(opt.Dir, rec.Trials[ti].Name+ext)
		rep, err := exportTrial(rec, &rec.Trials[ti], out, opt)
		if err != nil {
			return reps, err
		}
		reps = append(reps, *rep)
	}
	return reps, nil
}

// ExportEDFTrial writes one trial of rec (whose samples must be readable)
// to out; ExportEDF's identification check is the caller's job.
func ExportEDFTrial(rec *record.Recording, t *record.Trial, out string, opt EDFExportOptions) (*EDFFileReport, error) {
	return exportTrial(rec, t, out, opt)
}

// planned is one signal to write.
type planned struct {
	sig    edfplus.Signal
	rep    EDFSignalReport
	rate   float64
	n      int
	read   func(start int, dst []float64) error // one channel's values
	name   string                               // for "samples end"
	source *record.Array
}

func exportTrial(rec *record.Recording, t *record.Trial, out string, opt EDFExportOptions) (*EDFFileReport, error) {
	if err := atomicfile.CheckTarget(out, opt.Overwrite); err != nil {
		return nil, err
	}
	rep := &EDFFileReport{File: out, Trial: t.Name, Format: opt.Format.String() + "+"}
	start := math.NaN()
	same := func(s float64, what string) error {
		if math.IsNaN(start) {
			start = s
			return nil
		}
		if s != start {
			return fmt.Errorf("trial %s: %s starts at %g s, other signals at %g s; an EDF file has one time base", t.Name, what, s, start)
		}
		return nil
	}
	var sigs []*planned
	for ai := range t.Arrays {
		a := &t.Arrays[ai]
		if err := same(a.StartS, "array "+a.Name); err != nil {
			return nil, err
		}
		ps, err := planArray(a, opt.Format)
		if err != nil {
			return nil, err
		}
		sigs = append(sigs, ps...)
	}
	for _, fs := range []struct {
		s    *record.Signal
		name string
	}{{&t.Force, "force"}, {&t.ForceTarget, "force_target"}} {
		if !fs.s.Present() {
			continue
		}
		if err := same(fs.s.StartS, fs.name); err != nil {
			return nil, err
		}
		vals := fs.s.Values
		p := &planned{rate: fs.s.SamplingRateHz, n: len(vals), name: fs.name,
			read: func(start int, dst []float64) error { copy(dst, vals[start:]); return nil }}
		tr := transducerForce
		if fs.name == "force_target" {
			tr = transducerForceTarget
		}
		p.sig = edfplus.Signal{Label: map[string]string{"force": "Force", "force_target": "Force target"}[fs.name], Transducer: tr, PhysicalDimension: fs.s.Unit}
		p.rep = EDFSignalReport{Label: p.sig.Label, Source: fs.name, Unit: fs.s.Unit}
		if err := calibrate(p, opt.Format, vals); err != nil {
			return nil, err
		}
		sigs = append(sigs, p)
	}
	if len(sigs) == 0 {
		return nil, fmt.Errorf("trial %s has no arrays and no force to export", t.Name)
	}
	if math.IsNaN(start) {
		start = 0
	}
	labels(sigs)
	dur, durText, padded, err := recordDuration(sigs, opt.Format)
	if err != nil {
		return nil, fmt.Errorf("trial %s: %w", t.Name, err)
	}
	records := 0
	for _, p := range sigs {
		p.sig.SamplesPerRecord = int(math.Round(p.rate * dur))
		records = max(records, (p.n+p.sig.SamplesPerRecord-1)/p.sig.SamplesPerRecord)
	}
	// Annotations, bucketed by record.
	type ann struct {
		on, dur float64
		text    string
	}
	var anns []ann
	patient, recording, hstart, trialInField := identification(rec, t)
	if !trialInField {
		anns = append(anns, ann{start, math.NaN(), trialAnnotationText + t.Name})
	}
	// Every unit declared at the file's start, in the unit table's order
	// (its id and label as written), then its discharges by id.
	for _, a := range t.Arrays {
		for _, d := range a.Decompositions {
			for _, u := range d.Units {
				anns = append(anns, ann{start, math.NaN(), UnitDeclaration(a.Name, d.Name, u.ID, u.Label)})
			}
		}
	}
	for _, a := range t.Arrays {
		for _, d := range a.Decompositions {
			for _, u := range d.Units {
				txt := DischargeAnnotation(a.Name, d.Name, u.ID)
				for _, k := range u.Discharges {
					anns = append(anns, ann{a.StartS + float64(k)/a.SamplingRateHz, math.NaN(), txt})
					rep.Discharges++
				}
			}
		}
	}
	if s, ok := t.Extra[ExtraEDFAnnotations].(string); ok {
		var kept []edfAnnotation
		if err := json.Unmarshal([]byte(s), &kept); err == nil {
			for _, k := range kept {
				d := math.NaN()
				if k.DurationS != nil {
					d = *k.DurationS
				}
				anns = append(anns, ann{k.OnsetS, d, k.Text})
			}
		}
	}
	for _, p := range sigs {
		if padded && p.n < records*p.sig.SamplesPerRecord {
			anns = append(anns, ann{start + float64(p.n)/p.rate, math.NaN(), samplesEndText + p.name})
		}
	}
	buckets := make([][]byte, records)
	for r := range buckets {
		buckets[r] = edfplus.TimeKeepingTAL(start + float64(r)*dur)
	}
	for _, a := range anns {
		if err := edfplus.CheckAnnotationText(a.text); err != nil {
			return nil, err
		}
		r := int(math.Floor((a.on - start) / dur))
		r = min(max(r, 0), records-1)
		buckets[r] = edfplus.AppendTAL(buckets[r], a.on, a.dur, a.text)
	}
	rep.Annotations = len(anns)
	most := 0
	for _, b := range buckets {
		most = max(most, len(b))
	}
	bps := opt.Format.BytesPerSample()
	lo, hi := opt.Format.DigitalRange()
	h := &edfplus.Header{Format: opt.Format, Plus: true, Records: records, RecordDurationS: dur, RecordDurationText: durText}
	h.Patient, h.Recording, h.Start = patient, recording, hstart
	for _, p := range sigs {
		h.Signals = append(h.Signals, p.sig)
	}
	h.Signals = append(h.Signals, edfplus.Signal{Label: opt.Format.AnnotationLabel(), PhysicalMin: -1, PhysicalMax: 1, DigitalMin: lo, DigitalMax: hi,
		SamplesPerRecord: (most + bps - 1) / bps, Annotations: true})
	err = atomicfile.Write(out, opt.Overwrite, func(f *os.File) error {
		w, err := edfplus.NewWriter(f, h)
		if err != nil {
			return err
		}
		dig := make([][]int32, len(h.Signals))
		tals := make([][]byte, len(h.Signals))
		bufs := make([][]float64, len(sigs))
		for r := 0; r < records; r++ {
			for i, p := range sigs {
				spr := p.sig.SamplesPerRecord
				if bufs[i] == nil {
					bufs[i] = make([]float64, spr)
					dig[i] = make([]int32, spr)
				}
				s0 := r * spr
				n := min(spr, max(p.n-s0, 0))
				if n > 0 {
					if err := p.read(s0, bufs[i][:n]); err != nil {
						return err
					}
				}
				s := &h.Signals[i]
				for k := 0; k < spr; k++ {
					if k >= n { // padding after the last sample
						dig[i][k] = dig[i][max(k-1, 0)]
						if n == 0 && k == 0 {
							dig[i][k] = s.Digital(0)
						}
						continue
					}
					v := bufs[i][k]
					if math.IsNaN(v) || math.IsInf(v, 0) {
						return fmt.Errorf("trial %s %s sample %d is %v; EDF has no code for a missing value", t.Name, p.rep.Source, s0+k, v)
					}
					d := s.Digital(v)
					dig[i][k] = d
					if e := math.Abs(s.Physical(d) - v); e > p.rep.MaxAbsError {
						p.rep.MaxAbsError = e
					}
				}
			}
			tals[len(sigs)] = buckets[r]
			if err := w.WriteRecord(dig, tals); err != nil {
				return err
			}
		}
		return w.Close()
	})
	if err != nil {
		return nil, err
	}
	rep.RecordDurationS, rep.Records = dur, records
	worst := -1
	for i, p := range sigs {
		if p.rep.MaxAbsError > 0 {
			p.rep.Exact = false
		}
		rep.Signals = append(rep.Signals, p.rep)
		if worst < 0 || p.rep.MaxAbsError/p.rep.StepSize > sigs[worst].rep.MaxAbsError/sigs[worst].rep.StepSize {
			worst = i
		}
	}
	if w := sigs[worst].rep; w.MaxAbsError > 0 {
		rep.Warnings = append(rep.Warnings, fmt.Sprintf("%d-bit %s rounds the stored values: the largest rounding error is %.6g %s (signal %q, %s; one step is %.6g %s)",
			8*bps, h.Format, w.MaxAbsError, w.Unit, w.Label, w.Source, w.StepSize, w.Unit))
	}
	if padded {
		rep.Warnings = append(rep.Warnings, "no record duration fits every signal's length: the last record is padded and \"samples end\" annotations mark where each signal ends")
	}
	return rep, nil
}

// planArray plans one array's channels, reusing its EDF/BDF calibration
// when it has one that the target format can hold.
func planArray(a *record.Array, f edfplus.Format) ([]*planned, error) {
	n, c := a.Samples.Shape()
	if n == 0 {
		return nil, nil
	}
	col := newColumnReader(a, n, c)
	var ps []*planned
	for k, ch := range a.Channels {
		k := k
		p := &planned{rate: a.SamplingRateHz, n: n, name: a.Name, source: a,
			read: func(start int, dst []float64) error { return col.read(k, start, dst) }}
		p.sig = edfplus.Signal{Label: ch.Label, Transducer: transducerArray + a.Name + transducerChannel + ch.Label, PhysicalDimension: a.Unit,
			Prefiltering: prefilterText(a)}
		p.rep = EDFSignalReport{Label: ch.Label, Source: a.Name + "/" + ch.Label, Unit: a.Unit}
		ps = append(ps, p)
	}
	if cal := storedCalibration(a, c, f); cal[0] != nil {
		for k, p := range ps {
			p.sig.PhysicalMin, p.sig.PhysicalMax, p.sig.DigitalMin, p.sig.DigitalMax = cal[0][k], cal[1][k], int(cal[2][k]), int(cal[3][k])
			p.rep.StepSize, p.rep.Exact = math.Abs(p.sig.Scale()), true
		}
		return ps, nil
	}
	// One pass for each channel's range.
	lo, hi := make([]float64, c), make([]float64, c)
	for k := range lo {
		lo[k], hi[k] = math.Inf(1), math.Inf(-1)
	}
	buf := make([]float64, 4096*c)
	for s0 := 0; s0 < n; s0 += 4096 {
		m := min(4096, n-s0)
		if err := a.Samples.ReadFloat64(s0, buf[:m*c]); err != nil {
			return nil, err
		}
		for i, v := range buf[:m*c] {
			lo[i%c], hi[i%c] = math.Min(lo[i%c], v), math.Max(hi[i%c], v)
		}
	}
	for k, p := range ps {
		if err := setRange(p, f, lo[k], hi[k]); err != nil {
			return nil, fmt.Errorf("array %s channel %s: %w", a.Name, a.Channels[k].Label, err)
		}
	}
	return ps, nil
}

// storedCalibration returns the array's edf_* extras [pmin, pmax, dmin,
// dmax] when they fit the target format, else nil.
func storedCalibration(a *record.Array, c int, f edfplus.Format) [4][]float64 {
	var out [4][]float64
	lo, hi := f.DigitalRange()
	for i, k := range []string{ExtraEDFPhysicalMin, ExtraEDFPhysicalMax, ExtraEDFDigitalMin, ExtraEDFDigitalMax} {
		v, ok := a.Extra[k].([]float64)
		if !ok || len(v) != c {
			return [4][]float64{}
		}
		out[i] = v
	}
	for k := 0; k < c; k++ {
		if out[2][k] < float64(lo) || out[3][k] > float64(hi) {
			return [4][]float64{}
		}
		for _, x := range []float64{out[0][k], out[1][k]} {
			if s, back, err := edfplus.FormatNumber(x, 8); err != nil || back != x || s == "" {
				return [4][]float64{}
			}
		}
	}
	return out
}

func calibrate(p *planned, f edfplus.Format, vals []float64) error {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range vals {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	return setRange(p, f, lo, hi)
}

// setRange sets the full digital range and a physical range that holds
// [lo, hi], written in 8 characters rounded outwards.
func setRange(p *planned, f edfplus.Format, lo, hi float64) error {
	if math.IsInf(lo, 0) || math.IsNaN(lo) || math.IsNaN(hi) {
		lo, hi = 0, 0
	}
	if hi-lo < 1e-9*math.Max(math.Abs(lo), 1) {
		lo, hi = lo-1, hi+1
	}
	var err error
	if p.sig.PhysicalMin, err = outward(lo, false); err != nil {
		return err
	}
	if p.sig.PhysicalMax, err = outward(hi, true); err != nil {
		return err
	}
	dl, dh := f.DigitalRange()
	p.sig.DigitalMin, p.sig.DigitalMax = dl, dh
	p.rep.StepSize = p.sig.Scale()
	return nil
}

// outward is the 8-character decimal nearest to v on the outer side.
func outward(v float64, up bool) (float64, error) {
	for prec := 7; prec >= 0; prec-- {
		m := math.Pow(10, float64(prec))
		r := math.Floor(v*m) / m
		if up {
			r = math.Ceil(v*m) / m
		}
		s := strconv.FormatFloat(r, 'f', -1, 64)
		if len(s) <= 8 {
			back, _ := strconv.ParseFloat(s, 64)
			if up && back >= v || !up && back <= v {
				return back, nil
			}
		}
	}
	return 0, fmt.Errorf("values reach %g, which an 8-character EDF header field cannot hold", v)
}

func prefilterText(a *record.Array) string {
	if s, ok := a.Extra[ExtraEDFPrefilter].(string); ok {
		return s
	}
	var parts []string
	if !math.IsNaN(a.FilterLowHz) && a.FilterLowHz > 0 {
		parts = append(parts, "HP:"+strconv.FormatFloat(a.FilterLowHz, 'f', -1, 64)+"Hz")
	}
	if !math.IsNaN(a.FilterHighHz) && a.FilterHighHz > 0 {
		parts = append(parts, "LP:"+strconv.FormatFloat(a.FilterHighHz, 'f', -1, 64)+"Hz")
	}
	return strings.Join(parts, " ")
}

// columnReader reads one channel at a time from an array's sample source,
// which hands out whole rows: it keeps one block of rows and serves every
// channel from it, so the source is read once, in order.
type columnReader struct {
	src        record.SampleSource
	rows, cols int
	start, n   int
	buf        []float64
}

func newColumnReader(a *record.Array, rows, cols int) *columnReader {
	return &columnReader{src: a.Samples, rows: rows, cols: cols, start: -1}
}

func (c *columnReader) read(ch, start int, dst []float64) error {
	if start < c.start || start+len(dst) > c.start+c.n {
		n := max(len(dst), 8192)
		n = min(n, c.rows-start)
		if cap(c.buf) < n*c.cols {
			c.buf = make([]float64, n*c.cols)
		}
		c.buf = c.buf[:n*c.cols]
		if err := c.src.ReadFloat64(start, c.buf); err != nil {
			return err
		}
		c.start, c.n = start, n
	}
	for i := range dst {
		dst[i] = c.buf[(start-c.start+i)*c.cols+ch]
	}
	return nil
}
