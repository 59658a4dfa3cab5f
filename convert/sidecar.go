package convert

import (
	_ "embed"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"muarc/internal/docload"
	"muarc/record"
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
// attributes, channels and decomposition attributes. Members outside the
// layout's names go to Extra.
func (sc *Sidecar) Apply(rec *record.Recording) {
	v := sc.View
	if m, ok := v["study"].(map[string]any); ok {
		s := &rec.Study
		s.ID, s.Title, s.Description, s.Contact, s.License = str(m, "id"), str(m, "title"), str(m, "description"), str(m, "contact"), str(m, "license")
		s.Extra = extras(m, "id", "title", "description", "contact", "license")
	}
	if m, ok := v["subject"].(map[string]any); ok {
		s := &rec.Subject
		s.ID, s.Name, s.BirthDate, s.AgeBand, s.Sex = str(m, "id"), str(m, "name"), str(m, "birth_date"), str(m, "age_band"), str(m, "sex")
		s.AgeYears, s.HeightCm, s.MassKg = num(m, "age_years"), num(m, "height_cm"), num(m, "mass_kg")
		s.DominantSide, s.Phone, s.Email, s.Notes = str(m, "dominant_side"), str(m, "phone"), str(m, "email"), str(m, "notes")
		s.Extra = extras(m, "id", "name", "birth_date", "age_years", "age_band", "sex", "height_cm", "mass_kg", "dominant_side", "phone", "email", "notes")
	}
	if m, ok := v["session"].(map[string]any); ok {
		s := &rec.Session
		s.ID, s.Date, s.Site, s.Operator, s.Notes = str(m, "id"), str(m, "date"), str(m, "site"), str(m, "operator"), str(m, "notes")
		s.PowerLineHz = num0(m, "power_line_hz")
		s.Extra = extras(m, "id", "date", "site", "operator", "notes", "power_line_hz")
	}
	trials, _ := v["trials"].([]any)
	for _, tv := range trials {
		m, ok := tv.(map[string]any)
		if !ok {
			continue
		}
		t := trialNamed(rec, str(m, "name"))
		t.Task, t.TargetPctMVC, t.MVC, t.MVCUnit = str(m, "task"), num(m, "target_pct_mvc"), num(m, "mvc"), str(m, "mvc_unit")
		t.Profile = record.ForceProfile{Shape: str(m, "profile_shape"), RestS: num(m, "rest_s"), RampUpS: num(m, "ramp_up_s"),
			PlateauS: num(m, "plateau_s"), RampDownS: num(m, "ramp_down_s")}
		t.Notes = str(m, "notes")
		if fm, ok := m["force"].(map[string]any); ok {
			// The force trace's rate and start: defaults for its file.
			t.Force.SamplingRateHz, t.Force.StartS = num0(fm, "sampling_rate_hz"), num0(fm, "start_s")
		}
		t.Extra = extras(m, "name", "task", "target_pct_mvc", "mvc", "mvc_unit", "profile_shape", "rest_s", "ramp_up_s", "plateau_s", "ramp_down_s", "notes", "force", "force_target", "arrays")
		arrays, _ := m["arrays"].([]any)
		for _, av := range arrays {
			am, ok := av.(map[string]any)
			if !ok {
				continue
			}
			a := arrayNamed(t, str(am, "name"))
			a.Muscle, a.Side = str(am, "muscle"), str(am, "side")
			a.Rows, a.Columns, a.ADCBits = int(num0(am, "rows")), int(num0(am, "columns")), int(num0(am, "adc_bits"))
			a.IEDMm, a.Gain, a.FilterLowHz, a.FilterHighHz = num(am, "ied_mm"), num(am, "gain"), num(am, "filter_low_hz"), num(am, "filter_high_hz")
			a.Montage, a.Reference = str(am, "montage"), str(am, "reference")
			a.SoftwareFilters = jsonText(am, "software_filters")
			a.PlacementScheme, a.PlacementDescription = str(am, "placement_scheme"), str(am, "placement_description")
			if r := num0(am, "sampling_rate_hz"); r > 0 {
				a.SamplingRateHz = r
			}
			if _, ok := am["start_s"]; ok {
				a.StartS = num0(am, "start_s")
			}
			if u := str(am, "unit"); u != "" {
				a.Unit = u
			}
			a.Extra = extras(am, "name", "muscle", "side", "rows", "columns", "ied_mm", "gain", "adc_bits", "filter_low_hz", "filter_high_hz",
				"montage", "reference", "software_filters", "placement_scheme", "placement_description", "sampling_rate_hz", "start_s", "unit", "sample_type", "samples", "channel_count", "channels", "decompositions")
			if chs, ok := am["channels"].([]any); ok {
				a.Channels = a.Channels[:0]
				for _, cv := range chs {
					cm, _ := cv.(map[string]any)
					c := record.Channel{Label: str(cm, "label"), Row: record.NotOnGrid, Column: record.NotOnGrid, XMm: num(cm, "x_mm"), YMm: num(cm, "y_mm"), Usable: true}
					if _, ok := cm["row"]; ok {
						c.Row = int(num0(cm, "row"))
					}
					if _, ok := cm["column"]; ok {
						c.Column = int(num0(cm, "column"))
					}
					if u, ok := cm["usable"].(bool); ok {
						c.Usable = u
					}
					a.Channels = append(a.Channels, c)
				}
			}
			decs, _ := am["decompositions"].([]any)
			for _, dv := range decs {
				dm, ok := dv.(map[string]any)
				if !ok {
					continue
				}
				d := decompNamed(a, str(dm, "name"))
				d.Method, d.MethodVersion, d.Notes = str(dm, "method"), str(dm, "method_version"), str(dm, "notes")
				d.EditedByHand, _ = dm["edited_by_hand"].(bool)
				d.Parameters = "{}"
				if p := jsonText(dm, "parameters"); p != "" {
					d.Parameters = p
				}
			}
		}
	}
}

// jsonText is member k (an object) as JSON text; "" when it is absent.
func jsonText(m map[string]any, k string) string {
	if v, ok := m[k]; ok && v != nil {
		if b, err := json.Marshal(v); err == nil {
			return string(b)
		}
	}
	return ""
}

func str(m map[string]any, k string) string {
	s, _ := m[k].(string)
	return s
}

func num0(m map[string]any, k string) float64 {
	switch x := m[k].(type) {
	case int64:
		return float64(x)
	case float64:
		return x
	case int:
		return float64(x)
	}
	return 0
}

func num(m map[string]any, k string) float64 {
	if _, ok := m[k]; !ok {
		return math.NaN()
	}
	switch m[k].(type) {
	case int64, float64, int:
		return num0(m, k)
	}
	return math.NaN()
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
