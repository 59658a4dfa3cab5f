package convert

import (
	"strings"
)

// Discharge file shapes.
const (
	ShapeColumns = "columns" // one column per unit, shorter columns padded with blanks
	ShapeLong    = "long"    // a long table of unit, time
	ShapeLines   = "lines"   // one line per unit: its id, then its times
	ShapeMatrix  = "matrix"  // a pulse-train matrix: samples x units of 0/1
)

// DischargeOptions control reading a discharge file.
type DischargeOptions struct {
	TextOptions
	// Shape is "" (detect) or one of ShapeColumns, ShapeLong, ShapeLines,
	// ShapeMatrix.
	Shape string
	// Labels is "" (detect), "yes" or "no": whether the file names its
	// units (each line of a lines file starts with the unit's label; a
	// header of labels over columns or a matrix; a long table always does).
	Labels string
	// TimeBase is "" (detect), "s", "ms" or "samples".
	TimeBase string
	// FirstIndex is the index of the first sample when TimeBase is
	// "samples": 0 or 1; -1 = not given (detected only from an index 0 or
	// a "(0-based)"/"(1-based)" mark in the header).
	FirstIndex int
	// ToleranceSamples is how far (in samples) a time may lie from the
	// sample grid before it is reported; 0 means 0.1.
	ToleranceSamples float64
}

// Grid is the sample grid discharges are put on: the array's rate, the time
// of its sample 0 and its length.
type Grid struct {
	RateHz  float64
	StartS  float64
	Samples int
}

// UnitTrain is one unit's discharges as sample indices (0-based, sorted).
// ID numbers the units 1..N in file order; Label is the unit's label as
// written (empty when the file gives none).
type UnitTrain struct {
	ID         int64
	Label      string
	Discharges []int64
}

// Discharges is a discharge file read onto a sample grid.
type Discharges struct {
	File string
	// Reading says in words how the file was read; Labels whether it
	// holds unit labels.
	Reading string
	Labels  bool
	// Delimiter, DecimalComma and Header are the dialect the file was
	// read with.
	Delimiter    byte
	DecimalComma bool
	Header       bool
	Shape        string
	ShapeWhy     string
	TimeBase     string
	TimeBaseWhy  string
	// FirstIndex is the sample numbering of the file (0 or 1) for sample
	// indices; IndexWhy says how it was decided.
	FirstIndex int
	IndexWhy   string
	Units      []UnitTrain
	// OffGrid counts times farther than the tolerance from the grid;
	// WorstOffGrid is the largest distance in samples.
	OffGrid      int
	WorstOffGrid float64
	Notes        []string
}

// timeBaseOf reads the time base from a header cell: "[s]", "(ms)", or a
// label naming samples.
func timeBaseOf(h string) string {
	l, u, has := splitLabelUnit(h)
	if has {
		switch strings.TrimSpace(u) {
		case "s", "sec":
			return "s"
		case "ms", "msec":
			return "ms"
		case "samples", "sample", "1":
			return "samples"
		}
	}
	switch strings.ToLower(l) {
	case "sample", "samples", "sample index", "sample_index", "index":
		return "samples"
	case "time_s", "time s":
		return "s"
	case "time_ms", "time ms":
		return "ms"
	}
	return ""
}
