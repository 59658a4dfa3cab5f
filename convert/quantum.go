package convert

import (
	"bytes"
	"fmt"

	"muarc/record"
)

// Integer counts in disguise. Amplifiers deliver integer counts of an LSB;
// exports write them as decimals. A file whose every data cell is a plain
// fixed-point decimal with the same number of decimals d is, exactly, a
// column of integers m of 10^-d ("units"). With g the greatest common
// divisor of the differences between the units and r their common residue
// modulo g, every cell is m = k·g + c with an integer count k and an offset
// c ≡ r (mod g): stored as counts k with scale_factor g·10^-d and
// add_offset c·10^-d, nothing is rounded, the text of every cell is
// m printed with d decimals, and the value read back is m / 10^d, the
// float64 nearest to the decimal written. One cell that is not such a
// decimal (another number of decimals, an exponent, NaN, "-0.0", 2^53 or
// more units) and the file is stored as floats, as before.

// maxUnits bounds the units of a cell: below 2^53 they are exact in float64.
const maxUnits = 1 << 53

// fixedUnits reads a plain fixed-point decimal cell: an optional '-', one
// or more integer digits without a leading zero (a lone "0" is fine), and
// optionally sep followed by one or more digits. It gives the cell's value
// in units of its last digit and the number of decimals; why is non-empty
// when the cell is not such a decimal, saying what it is instead.
func fixedUnits(cell []byte, sep byte) (m int64, dec int, why string) {
	i := 0
	neg := false
	if len(cell) > 0 && cell[0] == '-' {
		neg = true
		i++
	}
	start := i
	var u uint64
	for i < len(cell) && cell[i]-'0' <= 9 {
		u = u*10 + uint64(cell[i]-'0')
		if u >= maxUnits {
			return 0, 0, "too many digits for exact counts (2^53 or more units of its last digit)"
		}
		i++
	}
	intDigits := i - start
	if intDigits == 0 {
		if len(cell) == 0 {
			return 0, 0, "empty"
		}
		return 0, 0, "not a plain decimal"
	}
	if intDigits > 1 && cell[start] == '0' {
		return 0, 0, "written with a leading zero"
	}
	if i < len(cell) && cell[i] == sep {
		i++
		fs := i
		for i < len(cell) && cell[i]-'0' <= 9 {
			u = u*10 + uint64(cell[i]-'0')
			if u >= maxUnits {
				return 0, 0, "too many digits for exact counts (2^53 or more units of its last digit)"
			}
			i++
		}
		dec = i - fs
		if dec == 0 {
			return 0, 0, "a decimal point without digits after it"
		}
		if dec > record.MaxScaleDecimals {
			return 0, 0, "more decimals than a count scale holds"
		}
	}
	if i != len(cell) {
		return 0, 0, "not a plain decimal"
	}
	if neg && u == 0 {
		return 0, 0, "a negative zero"
	}
	m = int64(u)
	if neg {
		m = -m
	}
	return m, dec, ""
}

// quantumStats is what the first pass learns about the data cells of a
// block (or of the file, merged in order): whether they are counts of one
// quantum, and the figures that choose it.
type quantumStats struct {
	cells  int64
	first  cellRef // the first cell
	broken bool
	why    string  // what broke it
	at     cellRef // the cell that broke it
	dec    int     // decimals of every cell (valid when cells > 0)
	ref    int64   // units of the first cell
	g      uint64  // gcd of |units - ref| over the cells
	lo, hi int64   // smallest and largest units
}

func gcd(a, b uint64) uint64 {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}

func absDiff(a, b int64) uint64 {
	if a > b {
		return uint64(a) - uint64(b)
	}
	return uint64(b) - uint64(a)
}

func (q *quantumStats) breakAt(why string, at cellRef) {
	if !q.broken {
		q.broken, q.why, q.at = true, why, at
	}
}

// add takes one data cell.
func (q *quantumStats) add(cell []byte, sep byte, line, col int) {
	if q.broken {
		return
	}
	m, dec, why := fixedUnits(cell, sep)
	if why != "" {
		q.breakAt(why, cellRef{line, col, clip(cell)})
		return
	}
	if q.cells == 0 {
		q.dec, q.ref, q.lo, q.hi = dec, m, m, m
		q.first = cellRef{line, col, clip(cell)}
	} else if dec != q.dec {
		q.breakAt(fmt.Sprintf("written with %d decimals, earlier cells with %d", dec, q.dec), cellRef{line, col, clip(cell)})
		return
	}
	q.cells++
	if q.g != 1 {
		q.g = gcd(q.g, absDiff(m, q.ref))
	}
	q.lo, q.hi = min(q.lo, m), max(q.hi, m)
}

// merge adds the statistics of the next block.
func (q *quantumStats) merge(o *quantumStats) {
	if q.broken {
		return
	}
	if o.cells > 0 {
		switch {
		case q.cells == 0:
			q.dec, q.ref, q.lo, q.hi, q.g, q.first = o.dec, o.ref, o.lo, o.hi, o.g, o.first
		case o.dec != q.dec:
			q.breakAt(fmt.Sprintf("written with %d decimals, earlier cells with %d", o.dec, q.dec), o.first)
			return
		default:
			q.g = gcd(gcd(q.g, o.g), absDiff(o.ref, q.ref))
			q.lo, q.hi = min(q.lo, o.lo), max(q.hi, o.hi)
		}
		q.cells += o.cells
	}
	if o.broken {
		q.breakAt(o.why, o.at)
	}
}

// choose picks the counts, type and scale, or says why there are none.
func (q *quantumStats) choose(unit string) (record.SampleType, record.CountScale, string, bool) {
	if q.broken {
		return "", record.CountScale{}, fmt.Sprintf("line %d, column %d (%q) is %s", q.at.Line, q.at.Column, q.at.Text, q.why), false
	}
	if q.cells == 0 {
		return "", record.CountScale{}, "no data cells", false
	}
	g := int64(q.g)
	if g == 0 {
		g = 1 // every cell the same value
	}
	r := ((q.ref % g) + g) % g
	// Offset r: counts (lo-r)/g .. (hi-r)/g. Centred: an offset c ≡ r near
	// the middle, used only when it allows a smaller type.
	c := r
	typ := record.SmallestCountType((q.lo-r)/g, (q.hi-r)/g)
	mid := q.lo + (q.hi-q.lo)/2
	cc := r + (mid-r)/g*g
	if t2 := record.SmallestCountType((q.lo-cc)/g, (q.hi-cc)/g); t2 != "" && (typ == "" || smaller(t2, typ)) {
		typ, c = t2, cc
	}
	if typ == "" {
		return "", record.CountScale{}, fmt.Sprintf("%d counts of %s would not fit 32 bits", uint64(q.hi-q.lo)/uint64(g)+1, unitsText(g, q.dec)), false
	}
	sc, err := record.DecimalScale(g, c, q.dec)
	if err != nil {
		return "", record.CountScale{}, err.Error(), false
	}
	lo, hi := (q.lo-c)/g, (q.hi-c)/g
	why := fmt.Sprintf("%s counts of %s %s", typ, unitsText(g, q.dec), unit)
	if c != 0 {
		why += fmt.Sprintf(" plus %s %s", unitsText(c, q.dec), unit)
	}
	why += fmt.Sprintf(" (%d..%d): every one of %d cells is a whole number of counts at the %d decimals written; largest difference between text and stored value 0, and export writes every cell back as written",
		lo, hi, q.cells, q.dec)
	return typ, sc, why, true
}

func smaller(a, b record.SampleType) bool {
	_, ha := a.CountRange()
	_, hb := b.CountRange()
	return ha < hb
}

// unitsText prints m × 10^-dec.
func unitsText(m int64, dec int) string {
	s := record.CountScale{Decimals: dec}
	return string(s.AppendUnits(nil, m))
}

// quantumRow gives every data cell of a row to q (first pass).
func (sp *blockSpec) quantumRow(q *quantumStats, l []byte, line int) {
	sep := byte('.')
	if sp.d.DecimalComma {
		sep = ','
	}
	sp.eachCell(l, func(col int, cell []byte) bool {
		if col != sp.tcol && col < sp.cols && (sp.skip == nil || !sp.skip[col]) {
			q.add(cell, sep, line, col+1)
		}
		return !q.broken
	})
}

// eachCell calls fn with every cell of a row (trimmed, quotes removed)
// until it returns false.
func (sp *blockSpec) eachCell(l []byte, fn func(col int, cell []byte) bool) {
	d := sp.d.Delimiter
	col := 0
	if d == ' ' {
		pos := 0
		for {
			for pos < len(l) && (l[pos] == ' ' || l[pos] == '\t') {
				pos++
			}
			if pos >= len(l) {
				return
			}
			end := pos
			for end < len(l) && l[end] != ' ' && l[end] != '\t' {
				end++
			}
			if !fn(col, l[pos:end]) {
				return
			}
			col++
			pos = end
		}
	}
	for {
		i := bytes.IndexByte(l, d)
		cell := l
		if i >= 0 {
			cell = l[:i]
		}
		if len(cell) > 0 && (cell[0] <= ' ' || cell[len(cell)-1] <= ' ' || cell[0] == '"') {
			cell = trimBlank(cell)
			if len(cell) >= 2 && cell[0] == '"' && cell[len(cell)-1] == '"' {
				cell = trimBlank(cell[1 : len(cell)-1])
			}
		}
		if !fn(col, cell) || i < 0 {
			return
		}
		col++
		l = l[i+1:]
	}
}

// countsRow is row for the counts mode of the second pass: the time cell
// as always, every data cell as a count of the scale chosen in the first
// pass. A cell that is not one means the file changed between the passes.
func (sp *blockSpec) countsRow(b *block, l []byte, line int) error {
	sep := byte('.')
	if sp.d.DecimalComma {
		sep = ','
	}
	sc := sp.scale
	col := 0
	var err error
	sp.eachCell(l, func(c int, cell []byte) bool {
		col = c + 1
		if c >= sp.cols {
			err = perr(sp.file, line, c+1, "every row needs as many fields as the header; check for a stray delimiter", "row has more than %d fields", sp.cols)
			return false
		}
		if c == sp.tcol {
			n, kind := parseNumber(cell, sp.d.DecimalComma)
			if kind != cellNumber || n.rng != rangeOK {
				err = perr(sp.file, line, c+1, "every row needs its time as a finite number", "time cell %q", clip(cell))
				return false
			}
			b.times = append(b.times, n.v)
			b.rowLines = append(b.rowLines, int32(line-b.line))
			b.timeDec = max(b.timeDec, n.decimals)
			b.timeFrac = b.timeFrac || !n.integer
			return true
		}
		if sp.skip != nil && sp.skip[c] {
			return true
		}
		m, dec, why := fixedUnits(cell, sep)
		d := m - sc.OffsetUnits
		if why != "" || dec != sc.Decimals || d%sc.ScaleUnits != 0 {
			err = fmt.Errorf("%s:%d:%d: %q is not a whole number of counts of the scale the first pass found (did the file change while it was read?)", sp.file, line, c+1, clip(cell))
			return false
		}
		b.cnt = append(b.cnt, int32(d/sc.ScaleUnits))
		return true
	})
	if err != nil {
		return err
	}
	if col != sp.cols {
		return perr(sp.file, line, col, "every row needs as many fields as the header; fill a missing value with NaN or an empty cell", "row has %d fields, expected %d", col, sp.cols)
	}
	b.rows++
	return nil
}

// decideCounts stores the file as counts when the first pass found them,
// and says why not otherwise (in DTypeWhy later).
func (s *Signals) decideCounts() {
	s.countsWhyNot = ""
	if s.forced != "" {
		return
	}
	if len(s.Gaps) > 0 {
		s.countsWhyNot = "gaps in the time column are stored as rows of NaN"
		return
	}
	unit := s.Units[0]
	if unit == "" {
		unit = "(no unit)"
	}
	typ, sc, why, ok := s.quantum.choose(unit)
	if !ok {
		s.countsWhyNot = why
		return
	}
	s.DType, s.Scale, s.DTypeWhy = typ, sc, why
}

// ReadCounts streams the counts (second pass), for a file stored as counts.
func (src *SignalSource) ReadCounts(start int, dst []int32) error {
	if !src.s.DType.IsInteger() {
		return fmt.Errorf("convert: %s is not stored as counts", src.s.File)
	}
	return src.read(modeCounts, start, len(dst), func(i int, b *block, j int) {
		dst[i] = 0 // no gaps in a counts file
	}, func(i int, b *block, j, n int) { copy(dst[i:i+n], b.cnt[j:j+n]) })
}

// countSource is the SampleSource of a file stored as counts.
type countSource struct {
	src *SignalSource // a named field: reflection over a recording stops here
}

// Shape implements record.SampleSource.
func (c countSource) Shape() (int, int) { return c.src.Shape() }

// ReadCounts implements record.CountSource.
func (c countSource) ReadCounts(start int, dst []int32) error { return c.src.ReadCounts(start, dst) }

// Scale implements record.CountSource.
func (c countSource) Scale() record.CountScale { return c.src.s.Scale }

// ReadFloat64 gives the physical values of the counts.
func (c countSource) ReadFloat64(start int, dst []float64) error {
	k := make([]int32, len(dst))
	if err := c.ReadCounts(start, k); err != nil {
		return err
	}
	for i, v := range k {
		dst[i] = c.src.s.Scale.Physical(int64(v))
	}
	return nil
}

// ReadFloat32 gives the physical values of the counts rounded to float32.
func (c countSource) ReadFloat32(start int, dst []float32) error {
	k := make([]int32, len(dst))
	if err := c.ReadCounts(start, k); err != nil {
		return err
	}
	for i, v := range k {
		dst[i] = float32(c.src.s.Scale.Physical(int64(v)))
	}
	return nil
}

// samples is the array's SampleSource: the counts view when the file is
// stored as counts.
func (src *SignalSource) samples() record.SampleSource {
	if src.s.DType.IsInteger() {
		return countSource{src}
	}
	return src
}

var _ record.CountSource = countSource{}

// CountsReport is the choice of integer counts and its proof, in the import
// report and the provenance history.
type CountsReport struct {
	// ScaleFactor and AddOffset are the stored CF attributes; Scale and
	// Offset the same as the exact decimals.
	ScaleFactor float64 `json:"scale_factor"`
	AddOffset   float64 `json:"add_offset"`
	Scale       string  `json:"scale_decimal"`
	Offset      string  `json:"offset_decimal"`
	// TextDecimals is the number of decimals every cell was written with.
	TextDecimals int `json:"text_decimals"`
	// MinCount and MaxCount are the range of the stored counts.
	MinCount int64 `json:"min_count"`
	MaxCount int64 `json:"max_count"`
	// Cells is the number of data cells checked; MaxTextDifference the
	// largest difference between a cell's decimal and counts × scale +
	// offset, in the unit (always 0: otherwise the file is stored as
	// floats).
	Cells             int64   `json:"cells"`
	MaxTextDifference float64 `json:"max_text_difference"`
}

func (f *FileReport) setCounts(s *Signals) {
	if !s.DType.IsInteger() {
		f.Counts = nil
		return
	}
	q, sc := &s.quantum, s.Scale
	f.Counts = &CountsReport{ScaleFactor: sc.ScaleFactor, AddOffset: sc.AddOffset,
		Scale: unitsText(sc.ScaleUnits, sc.Decimals), Offset: unitsText(sc.OffsetUnits, sc.Decimals), TextDecimals: sc.Decimals,
		MinCount: (q.lo - sc.OffsetUnits) / sc.ScaleUnits, MaxCount: (q.hi - sc.OffsetUnits) / sc.ScaleUnits, Cells: q.cells,
		MaxTextDifference: 0}
}
