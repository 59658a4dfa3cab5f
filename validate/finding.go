// Package validate checks a muarc recording file: its metadata view against
// the JSON Schema schema/recording.schema.json, its HDF5 structure against
// the layout (schema/LAYOUT.md), and its content against the layout's rules
// and common-practice physiological ranges (discharge order, doublets,
// sustained rates, quality gates). Every problem is a Finding with a
// severity, a stable check id, the HDF5 path and the JSON path it concerns,
// and a hint on what to do. Thresholds and switched-off checks come from
// Rules, which a YAML or JSON rules file can change.
//
// Files are read through packages recfile and h5 only. A file that cannot be
// read at all gives a Report with ReadError set; validation never panics.
package validate

import (
	"encoding/json"
	"fmt"
)

// Severity ranks a finding.
type Severity int

// Severities, least to most severe.
const (
	// Note is information worth knowing; it never fails a file.
	Note Severity = iota
	// Warning is a likely problem; it fails a file only under Strict.
	Warning
	// Error breaks the layout or a hard rule; the file fails.
	Error
)

// String gives "note", "warning" or "error".
func (s Severity) String() string {
	switch s {
	case Note:
		return "note"
	case Warning:
		return "warning"
	case Error:
		return "error"
	}
	return fmt.Sprintf("severity(%d)", int(s))
}

// ParseSeverity reads "note", "warning" or "error".
func ParseSeverity(w string) (Severity, error) {
	switch w {
	case "note":
		return Note, nil
	case "warning":
		return Warning, nil
	case "error":
		return Error, nil
	}
	return Note, fmt.Errorf("severity %q: want note, warning or error", w)
}

// MarshalJSON writes the severity as its word.
func (s Severity) MarshalJSON() ([]byte, error) { return json.Marshal(s.String()) }

// UnmarshalJSON reads the severity's word.
func (s *Severity) UnmarshalJSON(b []byte) error {
	var w string
	if err := json.Unmarshal(b, &w); err != nil {
		return err
	}
	v, err := ParseSeverity(w)
	if err != nil {
		return err
	}
	*s = v
	return nil
}

// Finding is one problem found in a file.
type Finding struct {
	Severity Severity `json:"severity"`
	// Check is the stable id of the rule that found it, e.g.
	// "discharge.sorted"; rules files switch checks off by this id.
	Check   string `json:"check"`
	Message string `json:"message"`
	// HDF5Path is the object in the file, e.g. "/trials/ramp_10/arrays/ta".
	HDF5Path string `json:"hdf5_path,omitempty"`
	// JSONPath is the JSON Pointer (RFC 6901) into the metadata view, e.g.
	// "/trials/0/arrays/0".
	JSONPath string `json:"json_path,omitempty"`
	// Hint says what to do about it.
	Hint string `json:"hint,omitempty"`
}

// String gives "error discharge.sorted /trials/...: message".
func (f Finding) String() string {
	where := f.HDF5Path
	if where == "" {
		where = f.JSONPath
	}
	if where == "" {
		where = "/"
	}
	return fmt.Sprintf("%s %s %s: %s", f.Severity, f.Check, where, f.Message)
}

// Report is the outcome of validating one file.
type Report struct {
	File     string    `json:"file"`
	Findings []Finding `json:"findings"`
	// ReadError is set when the file could not be read at all (missing, not
	// HDF5, not a muarc file, newer major layout version).
	ReadError string `json:"read_error,omitempty"`
}

// Count returns the number of findings of severity s.
func (r *Report) Count(s Severity) int {
	n := 0
	for _, f := range r.Findings {
		if f.Severity == s {
			n++
		}
	}
	return n
}

// Failed reports whether the file could not be read or has an error.
func (r *Report) Failed() bool { return r.ReadError != "" || r.Count(Error) > 0 }
