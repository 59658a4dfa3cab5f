package convert

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
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
	// MUAPs are MUAP template tables and History a history table, as
	// muarc export writes them (optional).
	MUAPs   []string
	History string
	// DerivedUnits and DerivedMUAPs are derived-figure tables and derived
	// MUAP templates as muarc export writes them (derived.go): they go to
	// the decomposition's derived/ group, never to its unit table.
	DerivedUnits []string
	DerivedMUAPs []string
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
	// LabMeta is the lab's own metadata file of the recording and
	// Subjects the study's subjects table, both mapped through the
	// profile's lab_metadata section (labmeta.go); "" for none.
	LabMeta, Subjects string
	// SubjectFolder is the recording's subject code when the profile's
	// lab_metadata.subject_from is "folder" ("" = the folder's own name).
	SubjectFolder string
	// subjects is the subjects table read once for a whole study.
	subjects *SubjectTable
}

// FileReport says what was read from one input file and what was assumed.
type FileReport struct {
	Name          string  `json:"name"`
	Role          string  `json:"role"`
	Trial         string  `json:"trial,omitempty"`
	Array         string  `json:"array,omitempty"`
	Decomposition string  `json:"decomposition,omitempty"`
	Delimiter     string  `json:"delimiter,omitempty"`
	Rows          int     `json:"rows,omitempty"`
	Channels      int     `json:"channels,omitempty"`
	RateHz        float64 `json:"sampling_rate_hz,omitempty"`
	JitterS       float64 `json:"time_jitter_s,omitempty"`
	Gaps          []Gap   `json:"gaps,omitempty"`
	DType         string  `json:"sample_type,omitempty"`
	DTypeWhy      string  `json:"sample_type_why,omitempty"`
	LossyCells    int64   `json:"lossy_cells,omitempty"`
	MaxAbsError   float64 `json:"max_abs_error,omitempty"`
	// Counts is set when the samples are stored as integer counts.
	Counts     *CountsReport `json:"counts,omitempty"`
	Units      int           `json:"units,omitempty"`
	Discharges int           `json:"discharges,omitempty"`
	Notes      []string      `json:"notes,omitempty"`
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
	// extraSources are files read besides the inputs (a subjects table).
	extraSources []input
	// noTimes are discharge files that hold no number at all (a header
	// line only), by trial, array and decomposition, with the reader's
	// refusal; unitTables the unit tables read, with their rows. finish
	// decides each: see (*Plan).emptyDischarges.
	noTimes    map[[3]string]error
	unitTables map[[3]string]int
}

type input struct {
	path, rel, role  string
	trial, array, dc string
	// trialFrom says where trial came from ("" for the built-in default).
	trialFrom string
	// notes say how a name not given by the template was decided.
	notes []string
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
	var sc *Sidecar
	if in.Meta != "" {
		files = append(files, input{path: in.Meta, rel: rel(in.Meta), role: "metadata"})
		var err error
		if sc, err = ReadSidecar(in.Meta); err != nil {
			return nil, err
		}
		rep.Files = append(rep.Files, FileReport{Name: rel(in.Meta), Role: "metadata", Notes: []string{"validated against the recording JSON Schema"}})
	}
	if in.LabMeta != "" {
		files = append(files, input{path: in.LabMeta, rel: rel(in.LabMeta), role: "lab_metadata"})
	}
	view, err := pl.labMetadata(in, prof, sc, rel)
	if err != nil {
		return nil, err
	}
	if view != nil {
		if err := (&Sidecar{File: in.Meta, View: view}).Apply(rec); err != nil {
			return nil, fmt.Errorf("%s: %w", in.Meta, err)
		}
	} else {
		rep.Notes = append(rep.Notes, "no metadata sidecar: study, subject and session are empty")
	}
	if len(in.Unmatched) > 0 {
		rep.Notes = append(rep.Notes, "files not read (no template of the profile matches them): "+strings.Join(in.Unmatched, ", "))
	}
	defaultTrial, defaultFrom := "trial_1", ""
	if len(rec.Trials) == 1 {
		defaultTrial, defaultFrom = rec.Trials[0].Name, "the metadata's only trial"
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
		if it.trial != "" {
			it.trialFrom = "the file name (template " + tmpl + ")"
		} else {
			it.trial, it.trialFrom = defaultTrial, defaultFrom
			if d := filepath.Base(filepath.Dir(p)); trialExists(rec, d) {
				it.trial, it.trialFrom = d, "the folder name"
			}
		}
		return it
	}
	// Reading options per role: the profile's signals section, the role's
	// own members over it, then the command line's overrides.
	roleOpt := func(role string) SignalOptions {
		o := prof.readingFor(role)
		if in.RateHz > 0 {
			o.RateHz = in.RateHz
		}
		o.AllowGaps = o.AllowGaps || in.AllowGaps
		if in.DType != "" {
			o.DType = in.DType
		}
		return o
	}
	for _, p := range in.Force {
		it := name(p, prof.Files.Force, nil, "force")
		files = append(files, it)
		if err := pl.force(it, roleOpt("force"), prof); err != nil {
			return nil, err
		}
	}
	var arrays []string
	for _, p := range in.EMG {
		it := name(p, prof.Files.EMG, nil, "emg")
		if it.array == "" && IsEDF(p) {
			it.array = strings.TrimSuffix(strings.TrimPrefix(filepath.Base(p), "emg_"), filepath.Ext(p))
		} else if it.array == "" {
			if err := pl.arrayForUnnamed(&it, len(in.EMG), prof); err != nil {
				return nil, err
			}
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
		o := roleOpt("emg")
		o.Unit = prof.EMG.Unit
		o.Skip, o.Rename = prof.EMG.Skip, prof.EMG.Columns
		if err := pl.emg(it, o, prof); err != nil {
			pl.Close()
			return nil, err
		}
	}
	for _, role := range []string{"discharges", "units", "muaps", "derived_units", "derived_muaps"} {
		list, tmpl := in.Discharges, prof.Files.Discharges
		switch role {
		case "units":
			list, tmpl = in.Units, prof.Files.Units
		case "muaps":
			list, tmpl = in.MUAPs, prof.Files.MUAPs
		case "derived_units":
			list, tmpl = in.DerivedUnits, prof.Files.DerivedUnits
		case "derived_muaps":
			list, tmpl = in.DerivedMUAPs, prof.Files.DerivedMUAPs
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
				if err := pl.decompositionForUnnamed(&it, tmpl); err != nil {
					pl.Close()
					return nil, err
				}
			}
			files = append(files, it)
			var err error
			switch role {
			case "discharges":
				err = pl.discharges(it, prof)
			case "units":
				err = pl.units(it, prof)
			case "derived_units":
				err = pl.derivedUnits(it)
			case "derived_muaps":
				err = pl.derivedMUAPs(it)
			default:
				err = pl.muaps(it, prof)
			}
			if err != nil {
				pl.Close()
				return nil, err
			}
			last := &pl.Report.Files[len(pl.Report.Files)-1]
			last.Notes = append(it.notes, last.Notes...)
		}
	}
	if err := pl.finish(); err != nil {
		pl.Close()
		return nil, err
	}
	// Provenance.
	for _, f := range append(files, pl.extraSources...) {
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
	if in.History != "" {
		// The steps before this import, as an export wrote them.
		h, err := ReadHistory(in.History)
		if err != nil {
			pl.Close()
			return nil, err
		}
		rec.Provenance.History = append(h, rec.Provenance.History...)
		sf, err := sourceFile(in.History, rel(in.History), "history")
		if err != nil {
			pl.Close()
			return nil, err
		}
		rec.Provenance.Sources = append(rec.Provenance.Sources, sf)
		rep.Files = append(rep.Files, FileReport{Name: rel(in.History), Role: "history", Notes: []string{fmt.Sprintf("%d earlier steps of the history kept", len(h))}})
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

// finish checks what the files left open: arrays without EMG, units
// without figures, extra columns shorter than the unit list.
func (pl *Plan) finish() error {
	if err := pl.emptyDischarges(); err != nil {
		return err
	}
	for ti := range pl.Rec.Trials {
		t := &pl.Rec.Trials[ti]
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			if a.Samples == nil {
				return &ParseError{Msg: fmt.Sprintf("trial %q array %q is in the metadata but no EMG file was given for it", t.Name, a.Name), Hint: "give its EMG file (--emg) or remove it from the metadata"}
			}
			// A decomposition the metadata names but no file filled is not
			// stored (an empty one breaks later steps); the report says so.
			kept := a.Decompositions[:0]
			for _, d := range a.Decompositions {
				if len(d.Units) == 0 && d.MUAPs == nil && !pl.readEmpty(t.Name, a.Name, d.Name) {
					pl.Report.Notes = append(pl.Report.Notes, fmt.Sprintf("decomposition %q of trial %q array %q is in the metadata but no discharge or unit file was read for it: not stored (give its files with --discharges/--units, or a profile template with {decomposition})", d.Name, t.Name, a.Name))
					continue
				}
				kept = append(kept, d)
			}
			a.Decompositions = kept
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
		f.setCounts(s)
	}
	return nil
}

// ImportRecording reads the inputs and writes one muarc file.
func ImportRecording(in Inputs, out string, opt recfile.WriteOptions) (*Report, error) {
	pl, err := Read(in)
	if err != nil {
		return nil, inputError(err)
	}
	if err := pl.Write(out, opt); err != nil {
		return pl.Report, inputError(err)
	}
	return pl.Report, nil
}

// inputError gives a refused input as the input's problem (file, line,
// column and the line itself), also when it was found while the samples
// streamed into the output, rather than behind the output's HDF5 path.
func inputError(err error) error {
	if pe := AsParseError(err); pe != nil {
		return pe.withExample()
	}
	return err
}

func matches(re *regexp.Regexp, s string) bool {
	if re == nil {
		return false
	}
	return re.MatchString(s)
}
