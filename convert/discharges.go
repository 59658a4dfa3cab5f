package convert

import (
	"fmt"
	"math"
	"sort"
	"strconv"
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
	// TimeBase is "" (detect), "s", "ms" or "samples".
	TimeBase string
	// FirstIndex is the index of the first sample when TimeBase is
	// "samples": 0 or 1; -1 = not given (detect or assume 0).
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
type UnitTrain struct {
	ID         int64
	Discharges []int64
}

// Discharges is a discharge file read onto a sample grid.
type Discharges struct {
	File        string
	Shape       string
	ShapeWhy    string
	TimeBase    string
	TimeBaseWhy string
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

// ReadDischarges reads a discharge file in any of the four shapes.
func ReadDischarges(path string, g Grid, opt DischargeOptions) (*Discharges, error) {
	lay, err := readLayout(path, opt.TextOptions)
	if err != nil {
		return nil, err
	}
	// A sample of rows decides the shape; a pulse-train matrix (one row per
	// sample) is then streamed, other shapes are read whole.
	rows, complete, err := headRows(lay, 5000)
	if err != nil {
		return nil, err
	}
	if g.RateHz <= 0 || g.Samples <= 0 {
		return nil, perr(path, 0, 0, "import the EMG the discharges belong to", "no sample grid for the discharges")
	}
	if lay.header != nil && !isUnitLabel(lay.header[0]) && len(lay.header) > 1 && allNumbers(lay.header[1:]) {
		// "MU1,0.51,0.62": a line of a unit, not a header.
		hdr := textRow{line: lay.headerLine}
		for _, h := range lay.header {
			hdr.cells = append(hdr.cells, []byte(h))
		}
		rows = append([]textRow{hdr}, rows...)
		lay.header = nil
		lay.dialect.Header = false
	}
	dc := &Discharges{File: path, Shape: opt.Shape}
	dc.Notes = append(dc.Notes, lay.dialect.Why)
	if dc.Shape == "" {
		dc.Shape, dc.ShapeWhy = detectShape(lay, rows, g)
	} else {
		dc.ShapeWhy = "as given"
	}
	if dc.Shape != ShapeMatrix && !complete {
		if rows, err = readRows(lay); err != nil {
			return nil, err
		}
	}
	// Gather (unit, time cell) pairs per unit in file order.
	type cellAt struct {
		text      []byte
		line, col int
	}
	var ids []int64
	unitCells := map[int64][]cellAt{}
	addUnit := func(id int64, line, col int) error {
		if _, dup := unitCells[id]; dup {
			return perr(path, line, col, "each unit id may appear once; renumber or merge the units", "duplicate unit id %d", id)
		}
		unitCells[id] = []cellAt{}
		ids = append(ids, id)
		return nil
	}
	headerUnit := ""
	switch dc.Shape {
	case ShapeLong:
		if lay.header != nil {
			if len(lay.header) < 2 {
				return nil, perr(path, lay.headerLine, 0, "a long table has a unit column and a time column", "header has %d columns", len(lay.header))
			}
			headerUnit = timeBaseOf(lay.header[1])
		}
		for _, r := range rows {
			if len(r.cells) != 2 {
				return nil, perr(path, r.line, min(len(r.cells)+1, 3), "each row holds a unit id and one time", "row has %d fields, expected 2", len(r.cells))
			}
			id, err := unitID(r.cells[0])
			if err != nil {
				return nil, perr(path, r.line, 1, "write the unit as a whole number (or a name ending in one, MU3)", "%v", err)
			}
			if _, ok := unitCells[id]; !ok {
				ids = append(ids, id)
			}
			unitCells[id] = append(unitCells[id], cellAt{r.cells[1], r.line, 2})
		}
	case ShapeLines:
		for _, r := range rows {
			id, err := unitID(r.cells[0])
			if err != nil {
				return nil, perr(path, r.line, 1, "each line starts with the unit id", "%v", err)
			}
			if err := addUnit(id, r.line, 1); err != nil {
				return nil, err
			}
			for c, t := range r.cells[1:] {
				if len(t) > 0 {
					unitCells[id] = append(unitCells[id], cellAt{t, r.line, c + 2})
				}
			}
		}
	case ShapeColumns, ShapeMatrix:
		n := lay.fields
		for c := 0; c < n; c++ {
			id := int64(c + 1)
			if lay.header != nil {
				l, u, _ := splitLabelUnit(lay.header[c])
				if headerUnit == "" {
					headerUnit = timeBaseOf("x [" + u + "]")
				}
				v, err := unitID([]byte(l))
				if err != nil {
					return nil, perr(path, lay.headerLine, c+1, "name each column by its unit id (1, MU1, unit_1)", "%v", err)
				}
				id = v
			}
			if err := addUnit(id, lay.headerLine, c+1); err != nil {
				return nil, err
			}
		}
		if lay.header == nil {
			dc.Notes = append(dc.Notes, fmt.Sprintf("no header: units numbered 1..%d by column (assumed)", n))
		}
		ri := 0
		take := func(line int, cells [][]byte) error {
			if len(cells) > n {
				return perr(path, line, n+1, "every row needs as many fields as the first line", "row has %d fields, expected %d", len(cells), n)
			}
			for c, t := range cells {
				if len(t) == 0 {
					continue
				}
				if dc.Shape == ShapeMatrix {
					switch string(t) {
					case "0":
					case "1":
						unitCells[ids[c]] = append(unitCells[ids[c]], cellAt{[]byte(strconv.Itoa(ri)), line, c + 1})
					default:
						return perr(path, line, c+1, "a pulse-train matrix holds only 0 and 1", "cell %q", clip(t))
					}
					continue
				}
				unitCells[ids[c]] = append(unitCells[ids[c]], cellAt{t, line, c + 1})
			}
			ri++
			return nil
		}
		if dc.Shape == ShapeMatrix {
			if err := eachRow(lay, take); err != nil {
				return nil, err
			}
		} else {
			for _, r := range rows {
				if err := take(r.line, r.cells); err != nil {
					return nil, err
				}
			}
		}
		rowCount := ri
		if dc.Shape == ShapeMatrix && rowCount != g.Samples {
			dc.Notes = append(dc.Notes, fmt.Sprintf("pulse-train matrix has %d rows, the EMG %d samples", rowCount, g.Samples))
		}
	default:
		return nil, perr(path, 0, 0, "give --shape columns, long, lines or matrix", "unknown shape %q", dc.Shape)
	}
	// Parse every time and decide the time base.
	vals := map[int64][]float64{}
	allInt := true
	maxV := math.Inf(-1)
	minV := math.Inf(1)
	for _, id := range ids {
		for _, c := range unitCells[id] {
			n, k := parseNumber(c.text, lay.dialect.DecimalComma)
			if k != cellNumber || math.IsInf(n.v, 0) {
				return nil, perr(path, c.line, c.col, "write each time as a number", "text %q where a time belongs", clip(c.text))
			}
			allInt = allInt && n.integer
			maxV, minV = math.Max(maxV, n.v), math.Min(minV, n.v)
			vals[id] = append(vals[id], n.v)
		}
	}
	dur := float64(g.Samples) / g.RateHz
	if base := headerIndexBase(lay.header); base >= 0 && opt.TimeBase == "" {
		headerUnit = "samples"
		if opt.FirstIndex < 0 {
			opt.FirstIndex = base
		}
	}
	switch {
	case dc.Shape == ShapeMatrix:
		dc.TimeBase, dc.TimeBaseWhy = "samples", "a pulse-train matrix: row k is sample k"
		opt.FirstIndex = 0
	case opt.TimeBase != "":
		dc.TimeBase, dc.TimeBaseWhy = opt.TimeBase, "as given"
	case headerUnit != "":
		dc.TimeBase, dc.TimeBaseWhy = headerUnit, "from the header"
	case allInt:
		dc.TimeBase, dc.TimeBaseWhy = "samples", "assumed: every time is a whole number, so they are taken as sample indices"
	case maxV <= g.StartS+dur:
		dc.TimeBase, dc.TimeBaseWhy = "s", fmt.Sprintf("assumed: times have fractions and the largest (%g) fits the %g s recording in seconds", maxV, dur)
	default:
		dc.TimeBase, dc.TimeBaseWhy = "ms", fmt.Sprintf("assumed: times have fractions and the largest (%g) exceeds the %g s recording, so milliseconds", maxV, dur)
	}
	switch dc.TimeBase {
	case "s", "ms":
	case "samples":
		dc.FirstIndex = opt.FirstIndex
		switch {
		case opt.FirstIndex == 0 || opt.FirstIndex == 1:
			dc.IndexWhy = "as given"
		case minV == 0:
			dc.FirstIndex, dc.IndexWhy = 0, "0-based: an index 0 occurs"
		case maxV == float64(g.Samples):
			dc.FirstIndex, dc.IndexWhy = 1, fmt.Sprintf("1-based: index %d (one past the last 0-based sample) occurs", g.Samples)
		default:
			dc.FirstIndex, dc.IndexWhy = 0, "assumed 0-based (no index 0 and none at the end to tell; give --first-index 1 for 1-based)"
		}
		if !allInt && dc.Shape != ShapeMatrix {
			return nil, perr(path, 0, 0, "sample indices are whole numbers; give --time-base s or ms for times", "sample indices with fractions")
		}
	default:
		return nil, perr(path, 0, 0, "give --time-base s, ms or samples", "unknown time base %q", dc.TimeBase)
	}
	tol := opt.ToleranceSamples
	if tol <= 0 {
		tol = 0.1
	}
	for _, id := range ids {
		u := UnitTrain{ID: id, Discharges: make([]int64, 0, len(vals[id]))}
		sorted := true
		for i, v := range vals[id] {
			c := unitCells[id][i]
			var x float64
			switch dc.TimeBase {
			case "s":
				x = (v - g.StartS) * g.RateHz
			case "ms":
				x = (v/1000 - g.StartS) * g.RateHz
			default:
				x = v - float64(dc.FirstIndex)
			}
			k := math.Round(x)
			if d := math.Abs(x - k); d > tol {
				dc.OffGrid++
				dc.WorstOffGrid = math.Max(dc.WorstOffGrid, d)
			}
			if k < 0 {
				return nil, perr(path, c.line, c.col, "check the time base and the start of the EMG", "discharge at %g is before the recording starts", v)
			}
			if k >= float64(g.Samples) {
				return nil, perr(path, c.line, c.col, "check the time base (s, ms, samples, 0- or 1-based) and that the file belongs to this EMG", "discharge at %g is after the end of the recording (sample %d of %d)", v, int64(k), g.Samples)
			}
			if n := len(u.Discharges); n > 0 && int64(k) < u.Discharges[n-1] {
				sorted = false
			}
			u.Discharges = append(u.Discharges, int64(k))
		}
		if !sorted {
			sort.Slice(u.Discharges, func(i, j int) bool { return u.Discharges[i] < u.Discharges[j] })
			dc.Notes = append(dc.Notes, fmt.Sprintf("unit %d: times were not in order; sorted", id))
		}
		for i := 1; i < len(u.Discharges); i++ {
			if u.Discharges[i] == u.Discharges[i-1] {
				dc.Notes = append(dc.Notes, fmt.Sprintf("unit %d: two discharges on sample %d (kept both)", id, u.Discharges[i]))
			}
		}
		dc.Units = append(dc.Units, u)
	}
	if dc.OffGrid > 0 {
		dc.Notes = append(dc.Notes, fmt.Sprintf("%d times lie more than %g samples from the %g Hz grid (worst %.3g samples); each was put on the nearest sample", dc.OffGrid, tol, g.RateHz, dc.WorstOffGrid))
	}
	dc.Notes = append(dc.Notes, "shape "+dc.Shape+" ("+dc.ShapeWhy+")", "time base "+dc.TimeBase+" ("+dc.TimeBaseWhy+")")
	if dc.TimeBase == "samples" && dc.Shape != ShapeMatrix {
		dc.Notes = append(dc.Notes, fmt.Sprintf("sample indices %d-based (%s)", dc.FirstIndex, dc.IndexWhy))
	}
	return dc, nil
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

// unitID reads a unit id: a whole number, or a name ending in one ("MU3",
// "unit_12", "mu 4").
func unitID(b []byte) (int64, error) {
	s := strings.TrimSpace(string(b))
	j := len(s)
	for j > 0 && s[j-1] >= '0' && s[j-1] <= '9' {
		j--
	}
	if j == len(s) {
		return 0, fmt.Errorf("unit id %q is not a number", s)
	}
	if j > 0 && s[j-1] == '-' && j == 1 {
		j = 0
	}
	v, err := strconv.ParseInt(s[j:], 10, 64)
	if err != nil {
		return 0, fmt.Errorf("unit id %q is not a number", s)
	}
	return v, nil
}

func isUnitLabel(h string) bool {
	l, _, _ := splitLabelUnit(h)
	switch strings.ToLower(strings.ReplaceAll(strings.ReplaceAll(l, "_", " "), "-", " ")) {
	case "unit", "unit id", "id", "mu", "mu id", "motor unit", "motor unit id", "muid", "unit number", "mu number", "mu #", "unit #":
		return true
	}
	return false
}

// detectShape decides a discharge file's shape from its header and rows.
func detectShape(lay *layout, rows []textRow, g Grid) (string, string) {
	if lay.header != nil && len(lay.header) == 2 && isUnitLabel(lay.header[0]) {
		return ShapeLong, fmt.Sprintf("detected: two columns headed %q and %q", lay.header[0], lay.header[1])
	}
	ragged, blanks, binary := false, false, true
	for _, r := range rows {
		if len(r.cells) != lay.fields {
			ragged = true
		}
		for _, c := range r.cells {
			if len(c) == 0 {
				blanks = true
			} else if string(c) != "0" && string(c) != "1" {
				binary = false
			}
		}
	}
	if lay.header != nil && isUnitLabel(lay.header[0]) && ragged {
		return ShapeLines, "detected: a unit header and lines of different lengths"
	}
	if ragged && !blanks {
		return ShapeLines, "detected: lines of different lengths, one per unit"
	}
	if binary && len(rows) > 0 && (len(rows) >= g.Samples/2 || len(rows) > 100) {
		return ShapeMatrix, fmt.Sprintf("detected: %d rows of 0 and 1 only", len(rows))
	}
	if lay.header == nil && len(rows) > 0 && !blanks && lay.fields > 1 && len(rows) < lay.fields {
		return ShapeLines, "detected: fewer rows than fields, no header: taken as one line per unit"
	}
	return ShapeColumns, "detected: one column per unit (columns padded with blanks)"
}

func allNumbers(cells []string) bool {
	for _, c := range cells {
		if _, k := parseNumber([]byte(c), false); k == cellText {
			return false
		}
	}
	return true
}

// headerIndexBase finds a "(0-based)" or "(1-based)" mark in a header: 0 or
// 1, -1 when there is none.
func headerIndexBase(h []string) int {
	for _, c := range h {
		_, u, _ := splitLabelUnit(c)
		switch strings.ToLower(u) {
		case "0-based":
			return 0
		case "1-based":
			return 1
		}
	}
	return -1
}
