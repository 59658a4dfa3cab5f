package convert

import (
	"encoding/json"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"muarc/edfplus"
	"muarc/record"
)

// ProfileEDF maps the signals of EDF, EDF+, BDF and BDF+ files onto arrays
// and force (PROFILES.md, "EDF and BDF files").
type ProfileEDF struct {
	// Arrays maps an array name to the labels of its channels, in order.
	// Empty: every signal in a voltage unit goes to one array named by the
	// file (the {array} of the template, else the file name).
	Arrays map[string][]string `yaml:"arrays" json:"arrays"`
	// Force and ForceTarget are the labels of the force and target
	// signals. Empty: the one signal in N or N.m is the force.
	Force       string `yaml:"force" json:"force"`
	ForceTarget string `yaml:"force_target" json:"force_target"`
	// Skip lists labels that are not read (trigger, status channels).
	Skip []string `yaml:"skip" json:"skip"`
	// Annotations is "units" (the default: unit and discharge annotations
	// are read, edfunits.go) or "notes" (every annotation kept as text).
	Annotations string `yaml:"annotations" json:"annotations"`
	// Trial says which name a trial takes when the file records one
	// (muarc's export) and the file name, the metadata or the default gives
	// another: "" refuses naming both, "recorded" takes the file's,
	// "given" the other.
	Trial string `yaml:"trial" json:"trial"`
}

// IsEDF reports whether a file name ends in .edf or .bdf (any case).
func IsEDF(path string) bool {
	e := strings.ToLower(filepath.Ext(path))
	return e == ".edf" || e == ".bdf"
}

// Calibration keys: the header values of each channel of an array read
// from EDF/BDF, kept in the array's extra attributes so that an export
// writes the same digital values (LAYOUT.md, "Arrays read from EDF or BDF").
const (
	ExtraEDFPhysicalMin = "edf_physical_min"
	ExtraEDFPhysicalMax = "edf_physical_max"
	ExtraEDFDigitalMin  = "edf_digital_min"
	ExtraEDFDigitalMax  = "edf_digital_max"
	ExtraEDFFormat      = "edf_format"
	ExtraEDFPrefilter   = "edf_prefiltering"
	ExtraEDFTransducer  = "edf_transducer"
	// ExtraEDFAnnotations holds a trial's annotations that are not
	// discharges, as a JSON array of {onset_s, duration_s, text}.
	ExtraEDFAnnotations = "edf_annotations"
	// ExtraEDFStart is the file's start date and clock time as written
	// (local time, no zone: EDF stores none), "YYYY-MM-DDThh:mm:ss".
	ExtraEDFStart = "edf_start_local"
)

// edfAnnotation is one annotation kept in ExtraEDFAnnotations.
type edfAnnotation struct {
	OnsetS    float64  `json:"onset_s"`
	DurationS *float64 `json:"duration_s,omitempty"`
	Text      string   `json:"text"`
}

func isVoltage(u string) bool {
	switch u {
	case "uV", "mV", "V", "nV":
		return true
	}
	return false
}

func isForce(u string) bool { return u == "N" || u == "N.m" || u == "kN" || u == "Nm" }

// edfFile reads one EDF/BDF file of a trial in a first pass (header,
// annotations, force) and sets up its arrays to stream in the second.
func (pl *Plan) edfFile(it input, prof *Profile) error {
	r, err := edfplus.Open(it.path)
	if err != nil {
		return err
	}
	defer r.Close()
	h := r.Header
	if err := pl.edfTrial(&it, r, prof.EDF.Trial); err != nil {
		return err
	}
	switch prof.EDF.Annotations {
	case "", EDFAnnotationsUnits, EDFAnnotationsNotes:
	default:
		return &ParseError{File: it.path, Msg: fmt.Sprintf("profile edf.annotations is %q", prof.EDF.Annotations), Hint: "write units, notes, or leave it out"}
	}
	if h.Discontinuous {
		// Allowed only when the records turn out contiguous (checked below).
		pl.Report.Notes = append(pl.Report.Notes, it.rel+": EDF+D/BDF+D file; its records are checked to be contiguous")
	}
	t := trialNamed(pl.Rec, it.trial)
	bad := func(sig int, hint, format string, a ...any) error {
		msg := fmt.Sprintf(format, a...)
		if sig >= 0 {
			msg = fmt.Sprintf("signal %d (%q): %s", sig+1, h.Signals[sig].Label, msg)
		}
		return &ParseError{File: it.path, Msg: msg, Hint: hint}
	}
	units := make([]string, len(h.Signals))
	skip := map[string]bool{}
	for _, l := range prof.EDF.Skip {
		skip[l] = true
	}
	byLabel := map[string]int{}
	for i, s := range h.Signals {
		byLabel[s.Label] = i
		if s.Annotations || skip[s.Label] {
			continue
		}
		u, err := NormalizeUnit(s.PhysicalDimension)
		if err != nil {
			return bad(i, "fix the physical dimension or list the signal under edf.skip in the profile", "%v", err)
		}
		units[i] = u
	}
	// Which signal goes where.
	arrays := map[string][]int{}
	var order []string
	force, target := -1, -1
	taken := map[int]bool{}
	labelOf := map[int]string{}
	pick := func(label, role string) (int, error) {
		i, ok := byLabel[label]
		if !ok {
			return -1, bad(-1, "name a signal label of the file in the profile", "the profile's %s %q is not a signal of this file", role, label)
		}
		if taken[i] {
			return -1, bad(i, "give each signal one role in the profile", "named twice in the profile")
		}
		taken[i] = true
		return i, nil
	}
	if prof.EDF.Force != "" {
		if force, err = pick(prof.EDF.Force, "edf.force"); err != nil {
			return err
		}
	}
	if prof.EDF.ForceTarget != "" {
		if target, err = pick(prof.EDF.ForceTarget, "edf.force_target"); err != nil {
			return err
		}
	}
	// Channel lists: the profile's, else the metadata's arrays of this trial
	// (matched by label), else every voltage signal in one array.
	lists := prof.EDF.Arrays
	if len(lists) == 0 {
		for _, a := range t.Arrays {
			if len(a.Channels) > 0 && a.Samples == nil {
				if lists == nil {
					lists = map[string][]string{}
				}
				for _, c := range a.Channels {
					lists[a.Name] = append(lists[a.Name], c.Label)
				}
			}
		}
	}
	if len(lists) > 0 {
		for name := range lists {
			order = append(order, name)
		}
		sort.Strings(order)
		for _, name := range order {
			for _, l := range lists[name] {
				i, err := pick(l, "edf.arrays."+name)
				if err != nil {
					return err
				}
				arrays[name] = append(arrays[name], i)
			}
		}
	} else if ours := transducerArrays(h, skip); ours != nil {
		// Written by muarc's export: the transducer field names array and channel.
		for i := range h.Signals {
			ac, ok := ours[i]
			if !ok {
				continue
			}
			if _, ok := arrays[ac[0]]; !ok {
				order = append(order, ac[0])
			}
			arrays[ac[0]] = append(arrays[ac[0]], i)
			labelOf[i] = ac[1]
			taken[i] = true
		}
	} else {
		name := it.array
		if name == "" {
			name = strings.TrimSuffix(filepath.Base(it.path), filepath.Ext(it.path))
		}
		order = []string{name}
		for i, s := range h.Signals {
			if !s.Annotations && !skip[s.Label] && !taken[i] && isVoltage(units[i]) {
				arrays[name] = append(arrays[name], i)
				taken[i] = true
			}
		}
	}
	for i, s := range h.Signals {
		if s.Annotations || skip[s.Label] || taken[i] {
			continue
		}
		if prof.EDF.Force == "" && force < 0 && s.Transducer == transducerForce {
			force, taken[i] = i, true
			continue
		}
		if prof.EDF.ForceTarget == "" && target < 0 && s.Transducer == transducerForceTarget {
			target, taken[i] = i, true
			continue
		}
		if prof.EDF.Force == "" && force < 0 && isForce(units[i]) {
			force, taken[i] = i, true
			continue
		}
		return bad(i, "give it a role in the profile (edf.arrays, edf.force, edf.force_target) or list it under edf.skip",
			"in unit %q, not taken by any array or as the force", s.PhysicalDimension)
	}
	// First pass: annotations, record continuity, force values.
	var rec edfplus.Record
	var anns []edfplus.Annotation
	var fvals, tvals []float64
	start := math.NaN()
	for i := 0; i < h.Records; i++ {
		if err := r.ReadRecord(i, &rec); err != nil {
			return err
		}
		if i == 0 {
			start = rec.OnsetS
		} else if want := start + float64(i)*h.RecordDurationS; math.Abs(rec.OnsetS-want) > 1e-7 {
			return &ParseError{File: it.path, Msg: fmt.Sprintf("data record %d starts at %.9g s, not %.9g s: the records are not contiguous", i, rec.OnsetS, want),
				Hint: "muarc stores evenly sampled signals; split the file at the gap"}
		}
		anns = append(anns, rec.Annotations...)
		if force >= 0 {
			for _, d := range rec.Digital[force] {
				fvals = append(fvals, h.Signals[force].Physical(d))
			}
		}
		if target >= 0 {
			for _, d := range rec.Digital[target] {
				tvals = append(tvals, h.Signals[target].Physical(d))
			}
		}
	}
	if t.Extra == nil {
		t.Extra = record.Extra{}
	}
	t.Extra[ExtraEDFStart] = h.Start.Format("2006-01-02T15:04:05")
	if pl.Rec.Session.Date == "" {
		pl.Rec.Session.Date = h.Start.Format("2006-01-02")
	}
	if force >= 0 {
		t.Force = record.Signal{SamplingRateHz: h.SamplingRateHz(force), StartS: start, Unit: units[force], Values: fvals}
		if t.MVCUnit == "" {
			t.MVCUnit = units[force]
		}
	}
	if target >= 0 {
		t.ForceTarget = record.Signal{SamplingRateHz: h.SamplingRateHz(target), StartS: start, Unit: units[target], Values: tvals}
	}
	// One report line per array (arrays of one file may differ in rate).
	var frs []FileReport
	for _, name := range order {
		sigs := arrays[name]
		if len(sigs) == 0 {
			continue
		}
		a := arrayNamed(t, name)
		if err := pl.edfArray(it, prof, h, a, sigs, units, labelOf, start); err != nil {
			return err
		}
		frs = append(frs, FileReport{Name: it.rel, Role: "emg", Trial: t.Name, Array: name, DType: "float64",
			DTypeWhy: fmt.Sprintf("%s samples are kept as float64 physical values, which give every %d-bit digital value back exactly", h.Format, 8*h.Format.BytesPerSample()),
			Channels: len(sigs), Rows: h.Records * h.Signals[sigs[0]].SamplesPerRecord, RateHz: a.SamplingRateHz})
	}
	if len(frs) == 0 {
		frs = append(frs, FileReport{Name: it.rel, Role: "emg", Trial: t.Name})
	}
	fr := &frs[0]
	fr.Notes = append(fr.Notes, it.notes...)
	for _, name := range order {
		if a := arrayNamed(t, name); a.Extra[ExtraEDFPrefilter] != nil {
			fr.Notes = append(fr.Notes, prefilterNotes(a)...)
		}
	}
	// Where padded signals end (muarc's export marks them).
	rest := anns[:0:0]
	for _, an := range anns {
		name, ok := strings.CutPrefix(an.Text, samplesEndText)
		if !ok {
			rest = append(rest, an)
			continue
		}
		if err := pl.edfEnd(it, t, name, an.OnsetS-start); err != nil {
			return err
		}
	}
	anns = rest
	// Units, discharges and other annotations (edfunits.go).
	total, decls := len(anns), 0
	for _, an := range anns {
		if unitDeclText.MatchString(an.Text) {
			decls++
		}
	}
	anns, count, err := pl.edfUnits(it, t, anns, prof.EDF.Annotations)
	if err != nil {
		return err
	}
	var kept []edfAnnotation
	for _, an := range anns {
		if strings.HasPrefix(an.Text, trialAnnotationText) && an.OnsetS == start {
			continue // read by edfTrial
		}
		ea := edfAnnotation{OnsetS: an.OnsetS, Text: an.Text}
		if !math.IsNaN(an.DurationS) {
			d := an.DurationS
			ea.DurationS = &d
		}
		kept = append(kept, ea)
	}
	if len(kept) > 0 {
		b, _ := json.Marshal(kept)
		t.Extra[ExtraEDFAnnotations] = string(b)
	}
	fr.Discharges = count
	fr.Notes = append(fr.Notes, fmt.Sprintf("%s%s, %d records of %s s, %d annotations: %d discharges, %d unit declarations, %d kept as text in the trial's %s", h.Format,
		map[bool]string{true: "+", false: ""}[h.Plus], h.Records, h.RecordDurationText, total, count, decls, len(kept), ExtraEDFAnnotations))
	for _, a := range t.Arrays {
		for _, d := range a.Decompositions {
			if n := len(d.Units); n > 0 {
				fr.Notes = append(fr.Notes, fmt.Sprintf("decomposition %s/%s: %d units from the annotations, labels as written", a.Name, d.Name, n))
			}
		}
	}
	if count == 0 && len(kept) > 0 && prof.EDF.Annotations != EDFAnnotationsNotes {
		fr.Notes = append(fr.Notes, "no annotation is a discharge; discharges are read from annotations written \"discharge ARRAY/DECOMPOSITION unit LABEL\" (convert/PROFILES.md, \"EDF and BDF files\")")
	}
	if force >= 0 {
		fr.Notes = append(fr.Notes, fmt.Sprintf("force from signal %q (%s)", h.Signals[force].Label, units[force]))
	}
	pl.Report.Files = append(pl.Report.Files, frs...)
	return nil
}

// edfArray fills one array from signals sigs of the file.
func (pl *Plan) edfArray(it input, prof *Profile, h *edfplus.Header, a *record.Array, sigs []int, units []string, labelOf map[int]string, start float64) error {
	label := func(i int) string {
		if l, ok := labelOf[i]; ok {
			return l
		}
		return h.Signals[i].Label
	}
	first := h.Signals[sigs[0]]
	for _, i := range sigs {
		s := h.Signals[i]
		if s.SamplesPerRecord != first.SamplesPerRecord {
			return &ParseError{File: it.path, Msg: fmt.Sprintf("signals %q and %q of array %s have different rates (%g and %g Hz)", first.Label, s.Label, a.Name, h.SamplingRateHz(sigs[0]), h.SamplingRateHz(i)),
				Hint: "one array holds channels of one rate; map them to different arrays in the profile (edf.arrays)"}
		}
		if units[i] != units[sigs[0]] {
			return &ParseError{File: it.path, Msg: fmt.Sprintf("signals %q and %q of array %s have different units (%s and %s)", first.Label, s.Label, a.Name, units[sigs[0]], units[i]),
				Hint: "one array holds channels of one unit"}
		}
	}
	rate := h.SamplingRateHz(sigs[0])
	if a.SamplingRateHz > 0 && math.Abs(a.SamplingRateHz-rate) > 1e-9*rate {
		return &ParseError{File: it.path, Msg: fmt.Sprintf("EMG rate %g Hz, the metadata says %g Hz for array %s", rate, a.SamplingRateHz, a.Name), Hint: "fix the rate in the metadata"}
	}
	if a.Unit != "" && a.Unit != units[sigs[0]] {
		return &ParseError{File: it.path, Msg: fmt.Sprintf("EMG unit %q, the metadata says %q for array %s", units[sigs[0]], a.Unit, a.Name), Hint: "fix the unit in the metadata"}
	}
	a.SamplingRateHz, a.StartS, a.Unit, a.SampleType = rate, start, units[sigs[0]], record.Float64
	if len(a.Channels) > 0 {
		if len(a.Channels) != len(sigs) {
			return &ParseError{File: it.path, Msg: fmt.Sprintf("array %s: %d signals, the metadata lists %d channels", a.Name, len(sigs), len(a.Channels)), Hint: "the metadata's channel list and the file's signals must match"}
		}
		for k, i := range sigs {
			if a.Channels[k].Label != label(i) {
				return &ParseError{File: it.path, Msg: fmt.Sprintf("array %s channel %d: the metadata says %q, the file's signal is %q", a.Name, k+1, a.Channels[k].Label, label(i)), Hint: "list the channels in the metadata in the file's signal order"}
			}
		}
	} else {
		for _, i := range sigs {
			a.Channels = append(a.Channels, record.Channel{Label: label(i), Row: record.NotOnGrid, Column: record.NotOnGrid, XMm: math.NaN(), YMm: math.NaN(), Usable: true})
		}
	}
	placeChannels(a.Channels, prof.EMG.Channels)
	if a.Extra == nil {
		a.Extra = record.Extra{}
	}
	var pmin, pmax, dmin, dmax []float64
	pre, tr := first.Prefiltering, first.Transducer
	for _, i := range sigs {
		s := h.Signals[i]
		pmin, pmax = append(pmin, s.PhysicalMin), append(pmax, s.PhysicalMax)
		dmin, dmax = append(dmin, float64(s.DigitalMin)), append(dmax, float64(s.DigitalMax))
		if s.Prefiltering != pre {
			pre = ""
		}
		if s.Transducer != tr {
			tr = ""
		}
	}
	a.Extra[ExtraEDFPhysicalMin], a.Extra[ExtraEDFPhysicalMax] = pmin, pmax
	a.Extra[ExtraEDFDigitalMin], a.Extra[ExtraEDFDigitalMax] = dmin, dmax
	a.Extra[ExtraEDFFormat] = h.Format.String()
	if pre != "" {
		a.Extra[ExtraEDFPrefilter] = pre
		lo, hi := parsePrefilter(pre)
		if math.IsNaN(a.FilterLowHz) {
			a.FilterLowHz = lo
		}
		if math.IsNaN(a.FilterHighHz) {
			a.FilterHighHz = hi
		}
	}
	if tr != "" {
		a.Extra[ExtraEDFTransducer] = tr
	}
	if a.ADCBits == 0 {
		a.ADCBits = 8 * h.Format.BytesPerSample()
	}
	src := &edfSource{path: it.path, sigs: sigs, rows: h.Records * first.SamplesPerRecord, spr: first.SamplesPerRecord, cur: -1}
	a.Samples = src
	if typ, sc, ok := edfCounts(h, sigs); ok {
		// One calibration for every channel: the digital values are the
		// counts, stored as they are with the CF scale.
		a.SampleType, a.Scale = typ, sc
		src.counts, src.scale = true, sc
	}
	return nil
}

// edfCounts is the integer form of an array's signals when they share one
// calibration: counts are the digital values, scale_factor =
// (physical max - physical min) / (digital max - digital min) and
// add_offset = physical min - digital min × scale_factor (EDF specification,
// "physical minimum/maximum" and "digital minimum/maximum" of the header).
func edfCounts(h *edfplus.Header, sigs []int) (record.SampleType, record.CountScale, bool) {
	f := h.Signals[sigs[0]]
	for _, i := range sigs {
		s := h.Signals[i]
		if s.PhysicalMin != f.PhysicalMin || s.PhysicalMax != f.PhysicalMax || s.DigitalMin != f.DigitalMin || s.DigitalMax != f.DigitalMax {
			return "", record.CountScale{}, false
		}
	}
	if f.DigitalMax <= f.DigitalMin || f.PhysicalMax == f.PhysicalMin {
		return "", record.CountScale{}, false
	}
	sf := (f.PhysicalMax - f.PhysicalMin) / float64(f.DigitalMax-f.DigitalMin)
	ao := f.PhysicalMin - float64(float64(f.DigitalMin)*sf)
	if math.IsNaN(sf) || math.IsInf(sf, 0) || math.IsInf(ao, 0) || math.IsNaN(ao) {
		return "", record.CountScale{}, false
	}
	// The samples of a file may lie outside the declared digital range;
	// the type holds every value the format can carry.
	lo, hi := int64(-1<<15), int64(1<<15-1)
	if h.Format.BytesPerSample() == 3 {
		lo, hi = -1<<23, 1<<23-1
	}
	return record.SmallestCountType(lo, hi), record.LinearScale(sf, ao), true
}

// edfEnd cuts the padding of a signal whose samples end at endS seconds
// after the first record ("samples end: NAME").
func (pl *Plan) edfEnd(it input, t *record.Trial, name string, endS float64) error {
	cut := func(rate float64, have int) (int, error) {
		n := endS * rate
		if math.Abs(n-math.Round(n)) > 0.1 || n < 0 || int(math.Round(n)) > have {
			return 0, &ParseError{File: it.path, Msg: fmt.Sprintf("annotation %q at %g s is not on a sample of %s", samplesEndText+name, endS, name), Hint: "the annotation marks where a padded signal ends"}
		}
		return int(math.Round(n)), nil
	}
	switch name {
	case "force", "force_target":
		sig := &t.Force
		if name == "force_target" {
			sig = &t.ForceTarget
		}
		n, err := cut(sig.SamplingRateHz, len(sig.Values))
		if err != nil {
			return err
		}
		sig.Values = sig.Values[:n]
		return nil
	}
	for ai := range t.Arrays {
		a := &t.Arrays[ai]
		if src, ok := a.Samples.(*edfSource); ok && a.Name == name {
			n, err := cut(a.SamplingRateHz, src.rows)
			if err != nil {
				return err
			}
			src.rows = n
			return nil
		}
	}
	return &ParseError{File: it.path, Msg: fmt.Sprintf("annotation %q names no signal of the file", samplesEndText+name), Hint: "the annotation marks where a padded signal ends"}
}

// transducerArrays reads muarc's transducer convention "sEMG array NAME
// channel LABEL" on every voltage signal: signal -> [array, label]. nil
// when any signal does not follow it.
func transducerArrays(h *edfplus.Header, skip map[string]bool) map[int][2]string {
	out := map[int][2]string{}
	for i, s := range h.Signals {
		if s.Annotations || skip[s.Label] || s.Transducer == transducerForce || s.Transducer == transducerForceTarget {
			continue
		}
		rest, ok := strings.CutPrefix(s.Transducer, transducerArray)
		if !ok {
			return nil
		}
		name, label, ok := strings.Cut(rest, transducerChannel)
		if !ok || name == "" || label == "" {
			return nil
		}
		out[i] = [2]string{name, label}
	}
	if len(out) == 0 {
		return nil
	}
	return out
}

// placeChannels sets grid positions and usability from the profile's
// emg.channels, matched by label; members the profile leaves out stay.
func placeChannels(chs []record.Channel, places map[string]ChannelPlace) {
	for i := range chs {
		c := &chs[i]
		pos, ok := places[c.Label]
		if !ok {
			continue
		}
		if pos.Row != nil {
			c.Row = *pos.Row
		}
		if pos.Column != nil {
			c.Column = *pos.Column
		}
		if pos.XMm != nil {
			c.XMm = *pos.XMm
		}
		if pos.YMm != nil {
			c.YMm = *pos.YMm
		}
		if pos.Usable != nil {
			c.Usable = *pos.Usable
		}
	}
}
