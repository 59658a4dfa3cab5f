package convert

import (
	_ "embed"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"muarc/internal/docload"
	"muarc/internal/fieldbind"
	"muarc/record"
	"muarc/schema"
	"muarc/validate"
)

// ExampleSidecar is a complete metadata sidecar to start from (muarc
// schema --example): every member of study, subject, session, a trial with
// its force and one array with a decomposition. Channels are left out: the
// EMG file's header gives them, the profile places them on the grid.
//
//go:embed example-sidecar.json
var ExampleSidecar []byte

// Sidecar is a metadata sidecar (a partial metadata view written by hand or
// by an export) read from JSON or YAML.
type Sidecar struct {
	File string
	// View is the decoded document.
	View map[string]any
	// lines maps JSON Pointers (RFC 6901) to their line and column in the
	// source.
	lines map[string][2]int
}

// SidecarError lists every problem of a sidecar, each with its JSON path
// and its place in the file.
type SidecarError struct {
	File     string
	Problems []*ParseError
}

func (e *SidecarError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %d problems in the metadata", e.File, len(e.Problems))
	for _, p := range e.Problems {
		b.WriteString("\n  " + p.Error())
	}
	return b.String()
}

// Unwrap gives the problems as errors (errors.As finds the first
// ParseError).
func (e *SidecarError) Unwrap() []error {
	out := make([]error, len(e.Problems))
	for i, p := range e.Problems {
		out[i] = p
	}
	return out
}

// ReadSidecar reads and validates a metadata sidecar against the recording
// JSON Schema (schema/recording.schema.json). Its format is JSON when the
// file name ends in .json, else YAML.
func ReadSidecar(path string) (*Sidecar, error) {
	data, err := docload.ReadFile(path)
	if err != nil {
		return nil, err
	}
	sc := &Sidecar{File: path}
	v, places, err := docload.Tree(path, data)
	if err != nil {
		var de *docload.Error
		if errors.As(err, &de) {
			return nil, &ParseError{File: path, Line: de.Line, Column: de.Column, Msg: de.Msg, Hint: de.Hint}
		}
		return nil, err
	}
	sc.lines = places
	if v == nil {
		return nil, perr(path, 1, 0, "write study, subject, session and trials", "empty metadata file")
	}
	m, ok := v.(map[string]any)
	if !ok {
		return nil, perr(path, 1, 1, "the metadata is one object with study, subject, session and trials", "top level is not an object")
	}
	sc.View = m
	se := &SidecarError{File: path}
	var rank []int
	for _, f := range validate.CheckMetadata(m) {
		// A sidecar is a partial view: the sampling rates come from the
		// signal files, so a missing one is not a problem of the sidecar.
		if f.Check == "metadata.required" && strings.HasSuffix(f.JSONPath, "/sampling_rate_hz") {
			continue
		}
		line, col := sc.Where(f.JSONPath)
		msg := f.Message
		if !strings.HasPrefix(msg, pointerOrTop(f.JSONPath)) {
			msg = pointerOrTop(f.JSONPath) + ": " + msg
		}
		se.Problems = append(se.Problems, &ParseError{File: path, Line: line, Column: col, Msg: msg, Hint: f.Hint})
		// A missing or mistyped top-level part causes the problems below
		// it: it comes first, then the rest in file order.
		r := 1
		if (f.Check == "metadata.required" || f.Check == "metadata.invalid_type") && strings.Count(f.JSONPath, "/") <= 1 {
			r = 0
		}
		rank = append(rank, r)
	}
	if len(se.Problems) > 0 {
		idx := make([]int, len(se.Problems))
		for i := range idx {
			idx[i] = i
		}
		sort.SliceStable(idx, func(a, b int) bool {
			pa, pb := se.Problems[idx[a]], se.Problems[idx[b]]
			if rank[idx[a]] != rank[idx[b]] {
				return rank[idx[a]] < rank[idx[b]]
			}
			if pa.Line != pb.Line {
				return pa.Line < pb.Line
			}
			return pa.Column < pb.Column
		})
		sorted := make([]*ParseError, len(idx))
		for i, j := range idx {
			sorted[i] = se.Problems[j]
		}
		se.Problems = sorted
		return nil, se
	}
	return sc, nil
}

func pointerOrTop(p string) string {
	if p == "" {
		return "/"
	}
	return p
}

// Where gives the line and column of a JSON Pointer in the source; a path
// that is not there (a missing member) gives the place of its nearest
// ancestor.
func (sc *Sidecar) Where(ptr string) (int, int) {
	for {
		if lc, ok := sc.lines[ptr]; ok {
			return lc[0], lc[1]
		}
		i := strings.LastIndexByte(ptr, '/')
		if i < 0 {
			return 1, 1
		}
		ptr = ptr[:i]
	}
}

// Apply copies the sidecar's metadata into rec: study, subject, session,
// and per trial and array (matched by name, created when missing) their
// attributes, the force trace's rate, start and unit, channels and
// decomposition attributes. Which members are fields, and where each one
// goes, follows the field registry (schema.Fields, bound to the model by
// internal/fieldbind); members outside the registry's names go to Extra.
// A member the sidecar leaves out keeps what rec holds. The signal files
// give the sample counts and types (fields the metadata view derives from
// the data); the unit tables, discharge files and history files give the
// decompositions' units and the provenance, so those parts of a sidecar
// (an export's metadata.json has them) are not read here.
func (sc *Sidecar) Apply(rec *record.Recording) error {
	v := sc.View
	var err error
	if m, ok := v["study"].(map[string]any); ok {
		rec.Study.Extra, err = fill(&rec.Study, "study", m, err)
	}
	if m, ok := v["subject"].(map[string]any); ok {
		rec.Subject.Extra, err = fill(&rec.Subject, "subject", m, err)
	}
	if m, ok := v["session"].(map[string]any); ok {
		rec.Session.Extra, err = fill(&rec.Session, "session", m, err)
	}
	for _, m := range objects(v["trials"]) {
		t := trialNamed(rec, str(m, nameMember))
		t.Extra, err = fill(t, "trial", m, err, "arrays")
		if fm, ok := m["force"].(map[string]any); ok {
			// The force trace's rate, start and unit: defaults for its file.
			_, err = fill(&t.Force, "signal", fm, err)
		}
		for _, am := range objects(m["arrays"]) {
			a := arrayNamed(t, str(am, nameMember))
			a.Extra, err = fill(a, "array", am, err, "channels", "decompositions")
			if chs, ok := am["channels"].([]any); ok {
				a.Channels = a.Channels[:0]
				for _, cv := range chs {
					cm, _ := cv.(map[string]any)
					c := record.Channel{Row: record.NotOnGrid, Column: record.NotOnGrid, XMm: math.NaN(), YMm: math.NaN(), Usable: true}
					_, err = fill(&c, "channel", cm, err)
					a.Channels = append(a.Channels, c)
				}
			}
			for _, dm := range objects(am["decompositions"]) {
				_, err = fill(decompNamed(a, str(dm, nameMember)), "decomposition", dm, err, "units", "derived")
			}
		}
	}
	return err
}

// objects are the members of a list that are objects (the JSON Schema has
// refused anything else before).
func objects(list any) []map[string]any {
	l, _ := list.([]any)
	var out []map[string]any
	for _, v := range l {
		if m, ok := v.(map[string]any); ok {
			out = append(out, m)
		}
	}
	return out
}

// fill sets the registry fields of group that m has on the model struct
// *ptr and returns m's other members (beyond the group's fields and the
// containers named) as extra fields, and the first error (prev when set).
// The sidecar passed the JSON Schema, so an error here means the schema
// and the registry disagree.
func fill(ptr any, group string, m map[string]any, prev error, containers ...string) (record.Extra, error) {
	err := prev
	for _, b := range fieldbind.Bind(ptr, group) {
		x, ok := m[b.Name()]
		if !ok || x == nil {
			continue
		}
		if e := b.Set(x); e != nil && err == nil {
			err = e
		}
	}
	known := containers
	for _, f := range schema.FieldsOf(group) {
		known = append(known, f.Name) // ViewOnly ones too: the data give them
	}
	return extras(m, known...), err
}

// nameMember is the member that names a trial, array or decomposition (the
// registry's KindName field of those groups): the key they are matched by.
const nameMember = "name"

func str(m map[string]any, k string) string {
	s, _ := m[k].(string)
	return s
}

// extras collects members not named in known, as record.Extra values.
func extras(m map[string]any, known ...string) record.Extra {
	skip := map[string]bool{}
	for _, k := range known {
		skip[k] = true
	}
	var keys []string
	for k := range m {
		if !skip[k] {
			keys = append(keys, k)
		}
	}
	if len(keys) == 0 {
		return nil
	}
	sort.Strings(keys)
	ex := record.Extra{}
	for _, k := range keys {
		switch x := m[k].(type) {
		case string, float64, int64, bool:
			ex[k] = x
		case []any:
			fs := make([]float64, 0, len(x))
			for _, e := range x {
				switch y := e.(type) {
				case float64:
					fs = append(fs, y)
				case int64:
					fs = append(fs, float64(y))
				}
			}
			ex[k] = fs
		}
	}
	return ex
}

func trialNamed(rec *record.Recording, name string) *record.Trial {
	for i := range rec.Trials {
		if rec.Trials[i].Name == name {
			return &rec.Trials[i]
		}
	}
	rec.Trials = append(rec.Trials, record.Trial{Name: name, TargetPctMVC: math.NaN(), MVC: math.NaN(),
		Profile: record.ForceProfile{RestS: math.NaN(), RampUpS: math.NaN(), PlateauS: math.NaN(), RampDownS: math.NaN()}})
	return &rec.Trials[len(rec.Trials)-1]
}

func arrayNamed(t *record.Trial, name string) *record.Array {
	for i := range t.Arrays {
		if t.Arrays[i].Name == name {
			return &t.Arrays[i]
		}
	}
	n := math.NaN()
	t.Arrays = append(t.Arrays, record.Array{Name: name, IEDMm: n, Gain: n, FilterLowHz: n, FilterHighHz: n})
	return &t.Arrays[len(t.Arrays)-1]
}

func decompNamed(a *record.Array, name string) *record.Decomposition {
	for i := range a.Decompositions {
		if a.Decompositions[i].Name == name {
			return &a.Decompositions[i]
		}
	}
	a.Decompositions = append(a.Decompositions, record.Decomposition{Name: name, Parameters: "{}"})
	return &a.Decompositions[len(a.Decompositions)-1]
}
