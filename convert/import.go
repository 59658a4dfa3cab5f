package convert

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
)

// Inputs name the files of one recording.
type Inputs struct {
	// Dir is the folder source names are relative to (provenance, trial
	// and array names from the profile templates). "" = the folder of Meta,
	// else the current folder.
	Dir        string
	Meta       string
	Force      []string
	EMG        []string
	Discharges []string
	Units      []string
	// Profile is the mapping profile; nil = DefaultProfile.
	Profile *Profile
	// DType forces the EMG sample type ("" = decide by the digits written).
	DType record.SampleType
	// Signals overrides, from the command line (zero = the profile's).
	RateHz    float64
	AllowGaps bool
	// Unmatched lists files of a recording folder that no template took
	// (reported, not read).
	Unmatched []string
}

// FileReport says what was read from one input file and what was assumed.
type FileReport struct {
	Name          string   `json:"name"`
	Role          string   `json:"role"`
	Trial         string   `json:"trial,omitempty"`
	Array         string   `json:"array,omitempty"`
	Decomposition string   `json:"decomposition,omitempty"`
	Delimiter     string   `json:"delimiter,omitempty"`
	Rows          int      `json:"rows,omitempty"`
	Channels      int      `json:"channels,omitempty"`
	RateHz        float64  `json:"sampling_rate_hz,omitempty"`
	JitterS       float64  `json:"time_jitter_s,omitempty"`
	Gaps          []Gap    `json:"gaps,omitempty"`
	DType         string   `json:"sample_type,omitempty"`
	DTypeWhy      string   `json:"sample_type_why,omitempty"`
	LossyCells    int64    `json:"lossy_cells,omitempty"`
	MaxAbsError   float64  `json:"max_abs_error,omitempty"`
	Units         int      `json:"units,omitempty"`
	Discharges    int      `json:"discharges,omitempty"`
	Notes         []string `json:"notes,omitempty"`
}

// Report is the import report of one recording.
type Report struct {
	Output string       `json:"output,omitempty"`
	Files  []FileReport `json:"files"`
	Notes  []string     `json:"notes,omitempty"`
	// Error is set in study reports when the recording failed.
	Error string `json:"error,omitempty"`
}

// Plan is a recording read in the first pass, ready to be written: its EMG
// samples stream from the text files in the second pass.
type Plan struct {
	Rec       *record.Recording
	Report    *Report
	sources   []*SignalSource
	sigs      []*Signals
	arrays    [][2]string // trial and array name of each EMG source
	reportIdx []int       // each EMG source's entry in Report.Files
}

type input struct {
	path, rel, role  string
	trial, array, dc string
}

// Read runs the first pass over every input of one recording and builds the
// recording. Nothing is written.
func Read(in Inputs) (*Plan, error) {
	prof := in.Profile
	if prof == nil {
		prof = DefaultProfile()
	}
	dir := in.Dir
	if dir == "" && in.Meta != "" {
		dir = filepath.Dir(in.Meta)
	}
	if dir == "" {
		dir = "."
	}
	rel := func(p string) string {
		if r, err := filepath.Rel(dir, p); err == nil && !strings.HasPrefix(r, "..") {
			return filepath.ToSlash(r)
		}
		return filepath.Base(p)
	}
	n := math.NaN()
	rec := &record.Recording{Subject: record.Subject{AgeYears: n, HeightCm: n, MassKg: n}}
	rep := &Report{}
	pl := &Plan{Rec: rec, Report: rep}
	var files []input
	if in.Meta != "" {
		files = append(files, input{path: in.Meta, rel: rel(in.Meta), role: "metadata"})
		sc, err := ReadSidecar(in.Meta)
		if err != nil {
			return nil, err
		}
		sc.Apply(rec)
		rep.Files = append(rep.Files, FileReport{Name: rel(in.Meta), Role: "metadata", Notes: []string{"validated against the recording JSON Schema"}})
	} else {
		rep.Notes = append(rep.Notes, "no metadata sidecar: study, subject and session are empty")
	}
	if len(in.Unmatched) > 0 {
		rep.Notes = append(rep.Notes, "files not read (no template of the profile matches them): "+strings.Join(in.Unmatched, ", "))
	}
	defaultTrial := "trial_1"
	if len(rec.Trials) == 1 {
		defaultTrial = rec.Trials[0].Name
	}
	// Names from the templates.
	name := func(p, tmpl string, arrays []string, role string) input {
		r := rel(p)
		re, _ := compileTemplate(tmpl, arrays)
		m, ok := matchTemplate(re, r)
		if !ok {
			// The file name alone against the template's last part.
			base := tmpl[strings.LastIndexByte(tmpl, '/')+1:]
			re, _ = compileTemplate(base, arrays)
			m, _ = matchTemplate(re, filepath.Base(p))
		}
		it := input{path: p, rel: r, role: role, trial: m["trial"], array: m["array"], dc: m["decomposition"]}
		if it.trial == "" {
			it.trial = defaultTrial
			if d := filepath.Base(filepath.Dir(p)); trialExists(rec, d) {
				it.trial = d
			}
		}
		return it
	}
	sopt := prof.signalOptions()
	if in.RateHz > 0 {
		sopt.RateHz = in.RateHz
	}
	sopt.AllowGaps = sopt.AllowGaps || in.AllowGaps
	if in.DType != "" {
		sopt.DType = in.DType
	}
	for _, p := range in.Force {
		it := name(p, prof.Files.Force, nil, "force")
		files = append(files, it)
		if err := pl.force(it, sopt, prof); err != nil {
			return nil, err
		}
	}
	var arrays []string
	for _, p := range in.EMG {
		it := name(p, prof.Files.EMG, nil, "emg")
		if it.array == "" {
			it.array = strings.TrimSuffix(strings.TrimPrefix(filepath.Base(p), "emg_"), filepath.Ext(p))
		}
		arrays = append(arrays, it.array)
		files = append(files, it)
		if IsEDF(p) { // EDF/BDF(+): arrays, force and annotations of a trial (edf.go)
			if err := pl.edfFile(it, prof); err != nil {
				pl.Close()
				return nil, err
			}
			continue
		}
		o := sopt
		o.Unit = prof.EMG.Unit
		o.Skip, o.Rename = prof.EMG.Skip, prof.EMG.Columns
		if err := pl.emg(it, o, prof); err != nil {
			pl.Close()
			return nil, err
		}
	}
	for _, role := range []string{"discharges", "units"} {
		list, tmpl := in.Discharges, prof.Files.Discharges
		if role == "units" {
			list, tmpl = in.Units, prof.Files.Units
		}
		for _, p := range list {
			it := name(p, tmpl, arrays, role)
			if it.array == "" {
				if len(arrays) != 1 {
					pl.Close()
					return nil, perr(p, 0, 0, "name the file as the profile's template says, e.g. discharges_<array>_<decomposition>.csv", "cannot tell which array the %s file belongs to", role)
				}
				it.array = arrays[0]
			}
			if it.dc == "" {
				it.dc = "imported"
			}
			files = append(files, it)
			var err error
			if role == "discharges" {
				err = pl.discharges(it, prof)
			} else {
				err = pl.units(it, prof)
			}
			if err != nil {
				pl.Close()
				return nil, err
			}
		}
	}
	if err := pl.finish(); err != nil {
		pl.Close()
		return nil, err
	}
	// Provenance.
	for _, f := range files {
		sf, err := sourceFile(f.path, f.rel, f.role)
		if err != nil {
			pl.Close()
			return nil, err
		}
		rec.Provenance.Sources = append(rec.Provenance.Sources, sf)
	}
	if prof.File != "" {
		sf, err := sourceFile(prof.File, filepath.Base(prof.File), "profile")
		if err != nil {
			pl.Close()
			return nil, err
		}
		rec.Provenance.Sources = append(rec.Provenance.Sources, sf)
	}
	details, _ := json.Marshal(map[string]any{"profile": prof.Name, "report": rep})
	rec.Provenance.History = append(rec.Provenance.History, record.Operation{Action: "import", Software: schema.Software, Time: time.Now().UTC(), Details: string(details)})
	return pl, nil
}

func trialExists(rec *record.Recording, name string) bool {
	for _, t := range rec.Trials {
		if t.Name == name {
			return true
		}
	}
	return false
}

func sourceFile(path, rel, role string) (record.SourceFile, error) {
	f, err := os.Open(path)
	if err != nil {
		return record.SourceFile{}, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return record.SourceFile{}, err
	}
	return record.SourceFile{Name: rel, Role: role, SHA256: hex.EncodeToString(h.Sum(nil)), Bytes: n}, nil
}

func (pl *Plan) force(it input, opt SignalOptions, prof *Profile) error {
	opt.DType = record.Float64
	s, err := ScanSignals(it.path, opt)
	if err != nil {
		return err
	}
	cols, err := s.Columns()
	if err != nil {
		return err
	}
	t := trialNamed(pl.Rec, it.trial)
	fi, ti := -1, -1
	for i, l := range s.Labels {
		switch {
		case prof.Force.TargetColumn != "" && strings.EqualFold(l, prof.Force.TargetColumn),
			prof.Force.TargetColumn == "" && strings.Contains(strings.ToLower(l), "target"):
			ti = i
		case prof.Force.Column != "" && strings.EqualFold(l, prof.Force.Column), prof.Force.Column == "" && fi < 0:
			fi = i
		default:
			return perr(it.path, s.lay.headerLine, i+1, "a force file holds a force column and optionally a target column; name them in the profile (force.column, force.target_column)", "column %q is neither the force nor the target", l)
		}
	}
	if fi < 0 {
		return perr(it.path, s.lay.headerLine, 0, "name the force column in the profile (force.column)", "no force column")
	}
	unit := func(i int) string {
		if s.Units[i] != "" {
			return s.Units[i]
		}
		return prof.Force.Unit
	}
	t.Force = record.Signal{SamplingRateHz: s.RateHz, StartS: s.StartS, Unit: unit(fi), Values: cols[fi]}
	if ti >= 0 {
		t.ForceTarget = record.Signal{SamplingRateHz: s.RateHz, StartS: s.StartS, Unit: unit(ti), Values: cols[ti]}
	}
	if t.MVCUnit == "" {
		t.MVCUnit = t.Force.Unit
	}
	if err := checkCount(s, "samples", s.Samples); err != nil {
		return err
	}
	for k, v := range MetaExtra(dropKeys(s.Meta, "samples")) {
		if t.Extra == nil {
			t.Extra = record.Extra{}
		}
		t.Extra["force_"+k] = v
	}
	fr := FileReport{Name: it.rel, Role: "force", Trial: t.Name, Delimiter: DelimiterName(s.Dialect.Delimiter), Rows: s.Rows,
		RateHz: s.RateHz, JitterS: s.JitterS, Gaps: s.Gaps, DType: "float64", DTypeWhy: "force traces are kept as float64", Notes: s.Notes}
	pl.Report.Files = append(pl.Report.Files, fr)
	return nil
}

func dropKeys(meta []MetaLine, keys ...string) []MetaLine {
	var out []MetaLine
	for _, m := range meta {
		drop := false
		for _, k := range keys {
			drop = drop || normKey(m.Key) == k
		}
		if !drop {
			out = append(out, m)
		}
	}
	return out
}

// checkCount compares a "samples: N" or "channels: N" line with the table.
func checkCount(s *Signals, key string, want int) error {
	v := metaValue(s.Meta, key)
	if v == "" {
		return nil
	}
	if v != fmt.Sprint(want) {
		return perr(s.File, metaLineOf(s.Meta, key), 0, "the file may be cut short or padded; check it", "the line above the table says %s: %s but the table has %d", key, v, want)
	}
	return nil
}

func (pl *Plan) emg(it input, opt SignalOptions, prof *Profile) error {
	s, err := ScanSignals(it.path, opt)
	if err != nil {
		return err
	}
	t := trialNamed(pl.Rec, it.trial)
	a := arrayNamed(t, it.array)
	if a.SamplingRateHz > 0 && math.Abs(a.SamplingRateHz-s.RateHz) > 1e-9*s.RateHz {
		return perr(it.path, 0, 0, "fix the rate in the metadata or in the EMG file", "EMG rate %g Hz, the metadata says %g Hz for array %s", s.RateHz, a.SamplingRateHz, a.Name)
	}
	a.SamplingRateHz, a.StartS = s.RateHz, s.StartS
	unit := ""
	for i, u := range s.Units {
		if i > 0 && u != unit {
			return perr(it.path, s.lay.headerLine, i+2, "all EMG channels of one array share one unit", "unit %q differs from %q", u, unit)
		}
		unit = u
	}
	if unit != "" {
		if a.Unit != "" && a.Unit != unit {
			return perr(it.path, s.lay.headerLine, 0, "fix the unit in the metadata or in the header", "EMG unit %q, the metadata says %q", unit, a.Unit)
		}
		a.Unit = unit
	}
	if v := metaValue(s.Meta, "array"); v != "" && v != a.Name {
		return perr(it.path, metaLineOf(s.Meta, "array"), 0, "the file name and the array line above the table must agree", "file says array %q, its name gives %q", v, a.Name)
	}
	if v := metaValue(s.Meta, "muscle"); v != "" && a.Muscle == "" {
		a.Muscle = v
	}
	if err := checkCount(s, "samples", s.Samples); err != nil {
		return err
	}
	if err := checkCount(s, "channels", len(s.Labels)); err != nil {
		return err
	}
	for k, v := range MetaExtra(dropKeys(s.Meta, "samples", "channels", "array", "muscle")) {
		if a.Extra == nil {
			a.Extra = record.Extra{}
		}
		if _, ok := a.Extra[k]; !ok {
			a.Extra[k] = v
		}
	}
	// Channels: the metadata's (matched by label) or new ones.
	if len(a.Channels) > 0 {
		if len(a.Channels) != len(s.Labels) {
			return perr(it.path, s.lay.headerLine, 0, "the metadata's channel list and the EMG columns must match", "%d EMG columns, the metadata lists %d channels", len(s.Labels), len(a.Channels))
		}
		for i, l := range s.Labels {
			if a.Channels[i].Label != l {
				return perr(it.path, s.lay.headerLine, i+2, "list the channels in the metadata in the order of the EMG columns", "column %q, the metadata's channel %d is %q", l, i+1, a.Channels[i].Label)
			}
		}
	} else {
		for _, l := range s.Labels {
			a.Channels = append(a.Channels, record.Channel{Label: l, Row: record.NotOnGrid, Column: record.NotOnGrid, XMm: math.NaN(), YMm: math.NaN(), Usable: true})
		}
		if len(prof.EMG.Channels) == 0 {
			s.Notes = append(s.Notes, "no grid positions given (metadata or profile): channels are not on the grid")
		}
	}
	placeChannels(a.Channels, prof.EMG.Channels)
	a.SampleType = s.DType
	src := s.Source()
	a.Samples = src
	pl.sources = append(pl.sources, src)
	pl.sigs = append(pl.sigs, s)
	pl.reportIdx = append(pl.reportIdx, len(pl.Report.Files))
	pl.arrays = append(pl.arrays, [2]string{t.Name, a.Name})
	fr := FileReport{Name: it.rel, Role: "emg", Trial: t.Name, Array: a.Name, Delimiter: DelimiterName(s.Dialect.Delimiter), Rows: s.Rows,
		Channels: len(s.Labels), RateHz: s.RateHz, Gaps: s.Gaps, DType: string(s.DType), DTypeWhy: s.DTypeWhy,
		LossyCells: s.LossyCells, MaxAbsError: s.MaxAbsError, Notes: s.Notes}
	pl.Report.Files = append(pl.Report.Files, fr)
	return nil
}

func (pl *Plan) arrayOf(it input) (*record.Array, error) {
	for ti := range pl.Rec.Trials {
		t := &pl.Rec.Trials[ti]
		if t.Name != it.trial {
			continue
		}
		for ai := range t.Arrays {
			if t.Arrays[ai].Name == it.array && t.Arrays[ai].Samples != nil {
				return &t.Arrays[ai], nil
			}
		}
	}
	return nil, perr(it.path, 0, 0, "give the EMG file of the array too (--emg)", "no EMG for trial %q array %q", it.trial, it.array)
}

func (pl *Plan) discharges(it input, prof *Profile) error {
	a, err := pl.arrayOf(it)
	if err != nil {
		return err
	}
	rows, _ := a.Samples.Shape()
	dc, err := ReadDischarges(it.path, Grid{RateHz: a.SamplingRateHz, StartS: a.StartS, Samples: rows}, prof.dischargeOptions())
	if err != nil {
		return err
	}
	d := decompNamed(a, it.dc)
	byLabel := map[string]int{}
	for i, u := range d.Units {
		if u.Label != "" {
			byLabel[u.Label] = i
		}
	}
	count := 0
	for _, tr := range dc.Units {
		if i, ok := byLabel[tr.Label]; ok && tr.Label != "" {
			d.Units[i].Discharges = tr.Discharges
		} else {
			u := record.NewUnit(nextUnitID(d))
			u.Label = tr.Label
			u.Discharges = tr.Discharges
			d.Units = append(d.Units, u)
		}
		count += len(tr.Discharges)
	}
	pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "discharges", Trial: it.trial, Array: a.Name, Decomposition: d.Name,
		Units: len(dc.Units), Discharges: count, Notes: dc.Notes})
	return nil
}

func (pl *Plan) units(it input, prof *Profile) error {
	a, err := pl.arrayOf(it)
	if err != nil {
		return err
	}
	d, _ := ParseDelimiter(prof.Signals.Delimiter)
	ut, err := ReadUnitTable(it.path, UnitTableOptions{TextOptions: TextOptions{Delimiter: d, DecimalComma: prof.Signals.DecimalComma}, Columns: prof.Units.Columns})
	if err != nil {
		return err
	}
	dec := decompNamed(a, it.dc)
	notes := append([]string(nil), ut.Notes...)
	// Units are matched by label as written. A discharge file without
	// labels numbered its units 1..N: then a table label that is exactly
	// such a number names that unit.
	idx := map[string]int{}
	unlabelled := len(dec.Units) > 0
	for i, u := range dec.Units {
		if u.Label != "" {
			idx[u.Label] = i
			unlabelled = false
		}
	}
	if unlabelled {
		for i, u := range dec.Units {
			idx[strconv.FormatInt(u.ID, 10)] = i
		}
		notes = append(notes, fmt.Sprintf("the discharge file has no unit labels: the table's units were matched to units 1..%d in the discharge file's order by their number", len(dec.Units)))
	}
	if len(idx) > 0 && len(ut.Units) > 0 {
		matched := false
		for _, u := range ut.Units {
			_, ok := idx[u.Label]
			matched = matched || ok
		}
		if !matched {
			var have []string
			for _, u := range dec.Units {
				have = append(have, u.Name())
				if len(have) == 5 {
					break
				}
			}
			return perr(it.path, 0, 0, "write each unit's label the same way in both files (muarc matches labels as written, never by the digits in them)",
				"no unit of the table (first %q) is among the discharge file's units (%s)", ut.Units[0].Label, strings.Join(have, ", "))
		}
	}
	rowOf := map[int64]int{}
	for r, u := range ut.Units {
		if i, ok := idx[u.Label]; ok {
			u.ID = dec.Units[i].ID
			u.Discharges = dec.Units[i].Discharges
			dec.Units[i] = u
		} else {
			u.ID = nextUnitID(dec)
			idx[u.Label] = len(dec.Units)
			dec.Units = append(dec.Units, u)
			notes = append(notes, fmt.Sprintf("unit %q has figures but no discharges", u.Label))
		}
		rowOf[u.ID] = r
	}
	// Extra columns in the decomposition's unit order.
	for _, c := range ut.Extra {
		col := record.Column{Name: c.Name, Unit: c.Unit}
		for _, u := range dec.Units {
			r, ok := rowOf[u.ID]
			if c.Values != nil {
				v := math.NaN()
				if ok {
					v = c.Values[r]
				}
				col.Values = append(col.Values, v)
			} else {
				s := ""
				if ok {
					s = c.Text[r]
				}
				col.Text = append(col.Text, s)
			}
		}
		dec.ExtraColumns = append(dec.ExtraColumns, col)
	}
	pl.Report.Files = append(pl.Report.Files, FileReport{Name: it.rel, Role: "units", Trial: it.trial, Array: a.Name, Decomposition: dec.Name,
		Units: len(ut.Units), Notes: notes})
	return nil
}

// finish checks what the files left open: arrays without EMG, units
// without figures, extra columns shorter than the unit list.
func (pl *Plan) finish() error {
	for ti := range pl.Rec.Trials {
		t := &pl.Rec.Trials[ti]
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			if a.Samples == nil {
				return &ParseError{Msg: fmt.Sprintf("trial %q array %q is in the metadata but no EMG file was given for it", t.Name, a.Name), Hint: "give its EMG file (--emg) or remove it from the metadata"}
			}
			for di := range a.Decompositions {
				d := &a.Decompositions[di]
				for ci := range d.ExtraColumns {
					c := &d.ExtraColumns[ci]
					for len(c.Values) > 0 && len(c.Values) < len(d.Units) {
						c.Values = append(c.Values, math.NaN())
					}
					for len(c.Text) > 0 && len(c.Text) < len(d.Units) {
						c.Text = append(c.Text, "")
					}
				}
			}
		}
	}
	return nil
}

// Close stops any second pass still running.
func (pl *Plan) Close() {
	for _, s := range pl.sources {
		s.Close()
	}
}

// Write streams the recording into a muarc file (atomically) and completes
// the report with what the second pass found (sample type, lossy cells,
// time jitter). EMG starts as float32; when a cell turns out not to fit
// float32 at the digits written, the write is abandoned (nothing is left
// behind) and done again with that array as float64.
func (pl *Plan) Write(path string, opt recfile.WriteOptions) error {
	defer pl.Close()
	for try := 0; ; try++ {
		err := recfile.Write(path, pl.Rec, opt)
		var we *wideError
		if err == nil {
			break
		}
		if !errors.As(err, &we) || try > len(pl.sigs) {
			return err
		}
		found := false
		for i, s := range pl.sigs {
			if s.File == we.File && s.DType == record.Float32 && s.forced == "" {
				s.DType = record.Float64
				s.forced = ""
				a := arrayNamed(trialNamed(pl.Rec, pl.arrays[i][0]), pl.arrays[i][1])
				a.SampleType = record.Float64
				pl.sources[i].Close()
				pl.sources[i] = s.Source()
				a.Samples = pl.sources[i]
				found = true
			}
		}
		if !found {
			return err
		}
	}
	pl.Report.Output = path
	for i, s := range pl.sigs {
		f := &pl.Report.Files[pl.reportIdx[i]]
		f.JitterS, f.DType, f.DTypeWhy, f.LossyCells, f.MaxAbsError = s.JitterS, string(s.DType), s.DTypeWhy, s.LossyCells, s.MaxAbsError
	}
	return nil
}

// ImportRecording reads the inputs and writes one muarc file.
func ImportRecording(in Inputs, out string, opt recfile.WriteOptions) (*Report, error) {
	pl, err := Read(in)
	if err != nil {
		return nil, err
	}
	if err := pl.Write(out, opt); err != nil {
		return pl.Report, err
	}
	return pl.Report, nil
}

// StudyRecording is one recording folder of a study with its inputs.
type StudyRecording struct {
	// Name is the folder's path relative to the study folder; the output
	// file is <Name>.h5 with '/' turned into '_'.
	Name   string
	Inputs Inputs
}

// FindRecordings lists the recording folders under dir that the profile
// describes, with each one's files matched to roles. A folder is a
// recording when it holds the profile's metadata file (or matches
// Profile.Recordings).
func FindRecordings(dir string, prof *Profile) ([]StudyRecording, error) {
	if prof == nil {
		prof = DefaultProfile()
	}
	var folders []string
	if prof.Recordings != "" {
		m, err := filepath.Glob(filepath.Join(dir, prof.Recordings))
		if err != nil {
			return nil, err
		}
		for _, f := range m {
			if st, err := os.Stat(f); err == nil && st.IsDir() {
				folders = append(folders, f)
			}
		}
	} else {
		err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if !d.IsDir() && filepath.ToSlash(d.Name()) == filepath.Base(prof.Files.Metadata) {
				root := filepath.Dir(p)
				if strings.Contains(prof.Files.Metadata, "/") {
					root = filepath.Clean(strings.TrimSuffix(p, filepath.FromSlash(prof.Files.Metadata)))
				}
				folders = append(folders, root)
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	sort.Strings(folders)
	var out []StudyRecording
	for _, f := range folders {
		r, err := MatchRecording(f, prof)
		if err != nil {
			return nil, err
		}
		name, _ := filepath.Rel(dir, f)
		out = append(out, StudyRecording{Name: filepath.ToSlash(name), Inputs: r})
	}
	return out, nil
}

// MatchRecording matches the files of one recording folder to roles by the
// profile's templates.
func MatchRecording(dir string, prof *Profile) (Inputs, error) {
	in := Inputs{Dir: dir, Profile: prof}
	var rels []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() {
			r, _ := filepath.Rel(dir, p)
			rels = append(rels, filepath.ToSlash(r))
		}
		return nil
	})
	if err != nil {
		return in, err
	}
	sort.Strings(rels)
	reF, _ := compileTemplate(prof.Files.Force, nil)
	reE, _ := compileTemplate(prof.Files.EMG, nil)
	reD0, _ := compileTemplate(prof.Files.Discharges, nil)
	reU0, _ := compileTemplate(prof.Files.Units, nil)
	var arrays, rest []string
	for _, r := range rels {
		p := filepath.Join(dir, filepath.FromSlash(r))
		switch {
		case r == prof.Files.Metadata:
			in.Meta = p
		case matches(reF, r):
			in.Force = append(in.Force, p)
		case matches(reD0, r), matches(reU0, r):
			rest = append(rest, r) // named once the arrays are known
		case matches(reE, r):
			in.EMG = append(in.EMG, p)
			m, _ := matchTemplate(reE, r)
			arrays = append(arrays, m["array"])
		default:
			in.Unmatched = append(in.Unmatched, r)
		}
	}
	reD, _ := compileTemplate(prof.Files.Discharges, arrays)
	reU, _ := compileTemplate(prof.Files.Units, arrays)
	for _, r := range rest {
		p := filepath.Join(dir, filepath.FromSlash(r))
		switch {
		case matches(reD, r):
			in.Discharges = append(in.Discharges, p)
		case matches(reU, r):
			in.Units = append(in.Units, p)
		default:
			in.Unmatched = append(in.Unmatched, r)
		}
	}
	if len(in.EMG) == 0 && len(in.Force) == 0 {
		return in, &ParseError{File: dir, Msg: "no force or EMG files match the profile", Hint: fmt.Sprintf("the profile expects %s and %s", prof.Files.Force, prof.Files.EMG)}
	}
	return in, nil
}

func matches(re *regexp.Regexp, s string) bool {
	if re == nil {
		return false
	}
	return re.MatchString(s)
}

// nextUnitID is the id for a unit added to d: one more than the largest.
func nextUnitID(d *record.Decomposition) int64 {
	var m int64
	for _, u := range d.Units {
		m = max(m, u.ID)
	}
	return m + 1
}
