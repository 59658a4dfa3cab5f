package convert

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"sync"

	"muarc/record"
)

// blockBytes is the size of the text blocks parsed in parallel. Small enough
// that a few blocks in flight keep memory flat, large enough that the
// per-block overhead vanishes.
const blockBytes = 512 << 10

// blockMode says what a worker does with the numbers of a block.
type blockMode uint8

const (
	modeScan   blockMode = iota // check every cell and gather statistics only
	mode32                      // convert data cells to float32 (and check they fit)
	mode64                      // convert data cells to float64
	modeCount                   // count rows and read the time column only (and gather quantumStats)
	modeCounts                  // convert data cells to integer counts of spec.scale
)

// blockSpec is what every worker needs to parse a block of signal rows.
type blockSpec struct {
	file  string
	d     Dialect
	cols  int // fields per row
	tcol  int // time column index or -1
	mode  blockMode
	all32 bool   // check every cell for float32 (forced float32: largest error wanted)
	skip  []bool // columns read and checked but not kept (nil: keep all)
	// allowRange stores infinity words and overflow as ±Inf and underflow
	// as 0 instead of refusing them.
	allowRange bool
	// quantum gathers quantumStats in the first pass; scale is the count
	// scale of modeCounts.
	quantum bool
	scale   record.CountScale
}

// block is one run of whole lines and what parsing it gave.
type block struct {
	buf  []byte
	data []byte
	line int // line number of data[0]

	rows      int
	f32       []float32
	f64       []float64
	cnt       []int32
	q         quantumStats
	times     []float64
	rowLines  []int32 // line of each row relative to line (time files only)
	timeDec   int     // most decimals written in a time cell
	timeFrac  bool    // a time cell had a fraction or exponent
	maxDigits int
	maxMant   uint64 // largest mantissa of a fast-path cell (digits = its length)
	nan       int64
	// f32 check: cells that do not fit float32, the largest error and where
	// the first one is.
	f32bad    int64
	f32MaxErr float64
	f32First  cellRef
	f64bad    int64
	f64MaxErr float64
	f64First  cellRef
	err       error
	done      chan struct{}
}

// cellRef locates a cell for the report.
type cellRef struct {
	Line, Column int
	Text         string
}

func (b *block) reset() {
	b.rows, b.timeDec, b.maxDigits, b.maxMant = 0, 0, 0, 0
	b.timeFrac = false
	b.f32, b.f64, b.times, b.rowLines = b.f32[:0], b.f64[:0], b.times[:0], b.rowLines[:0]
	b.cnt, b.q = b.cnt[:0], quantumStats{}
	b.nan, b.f32bad, b.f64bad = 0, 0, 0
	b.f32MaxErr, b.f64MaxErr = 0, 0
	b.f32First, b.f64First = cellRef{}, cellRef{}
	b.err = nil
	b.done = make(chan struct{})
}

// parse parses every row of the block.
func (sp *blockSpec) parse(b *block) {
	data := b.data
	line := b.line
	for len(data) > 0 {
		nl := bytes.IndexByte(data, '\n')
		var l []byte
		if nl < 0 {
			l, data = data, nil
		} else {
			l, data = data[:nl], data[nl+1:]
		}
		t := trimLine(l, sp.d.Delimiter)
		if bt := trimBlank(t); !blankLine(t, sp.d.Delimiter) && !isComment(bt) {
			if sp.mode == modeCount {
				if err := sp.countRow(b, t, line); err != nil {
					b.err = err
					return
				}
				if sp.quantum && !b.q.broken {
					sp.quantumRow(&b.q, t, line)
				}
			} else if sp.mode == modeCounts {
				if err := sp.countsRow(b, t, line); err != nil {
					b.err = err
					return
				}
			} else if err := sp.row(b, t, line); err != nil {
				b.err = err
				return
			}
		}
		line++
	}
}

// decimalDigits appends the decimal digits of l from i on to m and returns
// the index after them (small enough for the compiler to inline).
func decimalDigits(l []byte, i int, m uint64) (int, uint64) {
	for i < len(l) {
		c := l[i] - '0'
		if c > 9 {
			break
		}
		m = m*10 + uint64(c)
		i++
	}
	return i, m
}

// fastCell reads a plain decimal ("-12.345", "7") starting at pos and
// ending at the delimiter or the end of the line: no blanks, quotes,
// exponents or more than 19 digits. ok is false for anything else, and the
// caller takes the general path for that cell.
func fastCell(l []byte, pos int, delim, sep byte) (m uint64, frac int, neg, hasSep bool, end int, ok bool) {
	i := pos
	if i < len(l) && l[i] == '-' {
		neg = true
		i++
	}
	start := i
	i, m = decimalDigits(l, i, m)
	digits := i - start
	if i < len(l) && l[i] == sep {
		hasSep = true
		i++
		fs := i
		i, m = decimalDigits(l, i, m)
		frac = i - fs
		digits += frac
	}
	if digits == 0 || digits > 19 || i < len(l) && l[i] != delim {
		return 0, 0, false, false, i, false
	}
	return m, frac, neg, hasSep, i, true
}

func (sp *blockSpec) row(b *block, l []byte, line int) error {
	d := sp.d.Delimiter
	comma := sp.d.DecimalComma
	sep := byte('.')
	if comma {
		sep = ','
	}
	col := 0
	pos := 0
	for {
		if col >= sp.cols {
			return perr(sp.file, line, col+1, "every row needs as many fields as the header; check for a stray delimiter", "row has more than %d fields", sp.cols)
		}
		if d != ' ' {
			m, frac, neg, hasSep, end, ok := fastCell(l, pos, d, sep)
			// The fast path takes cells of at most 6 significant digits
			// (they fit float32: FLT_DIG = 6, ISO/IEC 9899 5.2.4.2.2) and,
			// for float64 and the time column, up to 15 (DBL_DIG = 15).
			if ok && frac <= 22 && (sp.skip == nil || !sp.skip[col]) && (m < 1000000 && (m == 0 || frac <= 37) || (col == sp.tcol || sp.mode == mode64) && m < 1000000000000000) {
				if col == sp.tcol || sp.mode == mode64 {
					v := float64(m) / pow10[frac]
					if neg {
						v = -v
					}
					if col == sp.tcol {
						b.times = append(b.times, v)
						b.rowLines = append(b.rowLines, int32(line-b.line))
						b.timeDec = max(b.timeDec, frac)
						b.timeFrac = b.timeFrac || hasSep
					} else {
						b.f64 = append(b.f64, v)
						b.maxMant = max(b.maxMant, m)
						if m >= 1000000 && b.f32bad == 0 {
							// Would float32 have held it? (for the report)
							n, _ := parseNumber(l[pos:end], comma)
							if !f32Exact(&n, toF32(&n, l[pos:end], comma)) {
								b.f32bad++
								b.f32First = cellRef{line, col + 1, string(l[pos:end])}
							}
						}
					}
				} else {
					if sp.mode == mode32 {
						var f float32
						if frac <= 10 {
							f = float32(m) / pow10f32[frac]
							if neg {
								f = -f
							}
						} else {
							n, _ := parseNumber(l[pos:end], comma)
							f = toF32(&n, l[pos:end], comma)
						}
						b.f32 = append(b.f32, f)
					}
					b.maxMant = max(b.maxMant, m)
				}
				col++
				if end >= len(l) {
					break
				}
				pos = end + 1
				continue
			}
		}
		// Find the cell [pos, end).
		var cell []byte
		last := false
		if d == ' ' {
			for pos < len(l) && (l[pos] == ' ' || l[pos] == '\t') {
				pos++
			}
			end := pos
			for end < len(l) && l[end] != ' ' && l[end] != '\t' {
				end++
			}
			cell = l[pos:end]
			pos = end
			for pos < len(l) && (l[pos] == ' ' || l[pos] == '\t') {
				pos++
			}
			last = pos >= len(l)
		} else {
			i := bytes.IndexByte(l[pos:], d)
			if i < 0 {
				cell = l[pos:]
				last = true
			} else {
				cell = l[pos : pos+i]
				pos += i + 1
			}
			cell = trimBlank(cell)
			if len(cell) >= 2 && cell[0] == '"' && cell[len(cell)-1] == '"' {
				cell = trimBlank(cell[1 : len(cell)-1])
			}
		}
		n, kind := parseNumber(cell, comma)
		if n.rng != rangeOK && (!sp.allowRange || col == sp.tcol) {
			return perr(sp.file, line, col+1, hintOutOfRange, "%q is %s", clip(cell), n.rng)
		}
		switch kind {
		case cellText:
			return perr(sp.file, line, col+1, "fix the cell; write NaN or leave it empty for a missing value", "text %q in a numeric cell", clip(cell))
		case cellEmpty, cellNaN:
			if col == sp.tcol {
				return perr(sp.file, line, col+1, "every row needs its time", "time cell is empty")
			}
			n.v = math.NaN()
			b.nan++
		}
		if sp.skip != nil && sp.skip[col] {
			// Checked, not kept.
		} else if col == sp.tcol {
			b.times = append(b.times, n.v)
			b.rowLines = append(b.rowLines, int32(line-b.line))
			b.timeDec = max(b.timeDec, n.decimals)
			b.timeFrac = b.timeFrac || !n.integer
		} else {
			b.maxDigits = max(b.maxDigits, n.digits)
			var f float32
			if kind == cellNumber {
				f = toF32(&n, cell, comma)
			} else {
				f = float32(math.NaN())
			}
			if kind == cellNumber && sp.mode != mode64 && (b.f32bad == 0 || sp.all32) || kind == cellNumber && sp.mode == mode64 && b.f32bad == 0 {
				if !f32Exact(&n, f) {
					if b.f32bad == 0 {
						b.f32First = cellRef{line, col + 1, string(cell)}
					}
					b.f32bad++
					if e := math.Abs(float64(f) - n.v); e > b.f32MaxErr {
						b.f32MaxErr = e
					}
					if sp.mode == mode32 && !sp.all32 {
						return &wideError{File: sp.file, Cell: b.f32First}
					}
				}
			}
			if n.digits > 15 && !f64Exact(&n) {
				if b.f64bad == 0 {
					b.f64First = cellRef{line, col + 1, string(cell)}
				}
				b.f64bad++
				if e := math.Abs(n.v) * 0x1p-53; e > b.f64MaxErr {
					b.f64MaxErr = e
				}
			}
			switch sp.mode {
			case mode32:
				b.f32 = append(b.f32, f)
			case mode64:
				b.f64 = append(b.f64, n.v)
			}
		}
		col++
		if last {
			break
		}
	}
	if col != sp.cols {
		return perr(sp.file, line, col, "every row needs as many fields as the header; fill a missing value with NaN or an empty cell", "row has %d fields, expected %d", col, sp.cols)
	}
	b.rows++
	return nil
}

// ErrNeedFloat64 is wrapped by the error a float32 sample stream returns when
// a cell does not fit float32 at the digits written; the importer then
// stores that array as float64.
var ErrNeedFloat64 = errors.New("a cell needs float64")

// wideError says which cell did not fit float32.
type wideError struct {
	File string
	Cell cellRef
}

func (e *wideError) Error() string {
	return fmt.Sprintf("%s:%d:%d: %q does not fit float32 at the digits written", e.File, e.Cell.Line, e.Cell.Column, e.Cell.Text)
}

func (e *wideError) Unwrap() error { return ErrNeedFloat64 }

// countRow is the first pass over a row: it is counted and its time cell
// read; the other cells wait for the second pass.
func (sp *blockSpec) countRow(b *block, l []byte, line int) error {
	b.rows++
	if sp.tcol < 0 {
		return nil
	}
	comma := sp.d.DecimalComma
	d := sp.d.Delimiter
	var cell []byte
	if d == ' ' {
		f := bytes.Fields(l)
		if sp.tcol < len(f) {
			cell = f[sp.tcol]
		} else {
			return perr(sp.file, line, len(f)+1, "every row needs its time", "row has no time cell")
		}
	} else {
		pos := 0
		for c := 0; c < sp.tcol; c++ {
			i := bytes.IndexByte(l[pos:], d)
			if i < 0 {
				return perr(sp.file, line, c+1, "every row needs its time", "row has no time cell")
			}
			pos += i + 1
		}
		end := bytes.IndexByte(l[pos:], d)
		if end < 0 {
			cell = l[pos:]
		} else {
			cell = l[pos : pos+end]
		}
		cell = trimBlank(cell)
		if len(cell) >= 2 && cell[0] == '"' && cell[len(cell)-1] == '"' {
			cell = trimBlank(cell[1 : len(cell)-1])
		}
	}
	n, kind := parseNumber(cell, comma)
	if n.rng != rangeOK {
		return perr(sp.file, line, sp.tcol+1, "every row needs its time as a finite number", "time %q is %s", clip(cell), n.rng)
	}
	switch kind {
	case cellText:
		return perr(sp.file, line, sp.tcol+1, "fix the cell; every row needs its time as a number", "text %q in the time column", clip(cell))
	case cellEmpty, cellNaN:
		return perr(sp.file, line, sp.tcol+1, "every row needs its time", "time cell is empty")
	}
	b.times = append(b.times, n.v)
	b.rowLines = append(b.rowLines, int32(line-b.line))
	b.timeDec = max(b.timeDec, n.decimals)
	b.timeFrac = b.timeFrac || !n.integer
	return nil
}

func clip(b []byte) string {
	if len(b) > 40 {
		return string(b[:40]) + "..."
	}
	return string(b)
}

// pipeline reads a file from an offset in blocks of whole lines, parses them
// on all cores and hands them back in order.
type pipeline struct {
	out  chan *block
	free chan *block
	stop chan struct{}
	once sync.Once
	wg   sync.WaitGroup
	err  error // read error, set before out is closed
}

func startPipeline(sp *blockSpec, off int64, line int) *pipeline {
	workers := runtime.GOMAXPROCS(0)
	inflight := workers + 2
	p := &pipeline{
		out:  make(chan *block, inflight),
		free: make(chan *block, inflight),
		stop: make(chan struct{}),
	}
	for i := 0; i < inflight; i++ {
		p.free <- &block{buf: make([]byte, blockBytes)}
	}
	work := make(chan *block, inflight)
	for w := 0; w < workers; w++ {
		p.wg.Add(1)
		go func() {
			defer p.wg.Done()
			for b := range work {
				sp.parse(b)
				close(b.done)
			}
		}()
	}
	go func() {
		defer close(p.out)
		defer close(work)
		f, err := os.Open(sp.file)
		if err != nil {
			p.err = err
			return
		}
		defer f.Close()
		if _, err := f.Seek(off, io.SeekStart); err != nil {
			p.err = err
			return
		}
		var carry []byte
		eof := false
		for !eof || len(carry) > 0 {
			var b *block
			select {
			case b = <-p.free:
			case <-p.stop:
				return
			}
			b.reset()
			if cap(b.buf) < len(carry)+blockBytes/2 {
				b.buf = make([]byte, 2*(len(carry)+blockBytes/2))
			}
			buf := b.buf[:cap(b.buf)]
			n := copy(buf, carry)
			for n < len(buf) && !eof {
				m, err := f.Read(buf[n:])
				n += m
				if err == io.EOF {
					eof = true
				} else if err != nil {
					p.err = err
					return
				}
			}
			data := buf[:n]
			cut := bytes.LastIndexByte(data, '\n')
			if eof {
				cut = n - 1
			} else if cut < 0 {
				// One line longer than the block: grow and read on.
				carry = append([]byte(nil), data...)
				b.buf = make([]byte, 2*len(data))
				p.free <- b
				continue
			}
			b.data = data[:cut+1]
			carry = append(carry[:0], data[cut+1:]...)
			b.line = line
			line += bytes.Count(b.data, []byte{'\n'})
			if eof && len(b.data) > 0 && b.data[len(b.data)-1] != '\n' {
				line++
			}
			if eof {
				carry = nil
			}
			select {
			case work <- b:
			case <-p.stop:
				return
			}
			select {
			case p.out <- b:
			case <-p.stop:
				return
			}
		}
	}()
	return p
}

// next returns the next parsed block in file order, nil at the end.
func (p *pipeline) next() (*block, error) {
	b, ok := <-p.out
	if !ok {
		return nil, p.err
	}
	<-b.done
	if b.err != nil {
		return b, b.err
	}
	return b, nil
}

// release gives a block's memory back to the reader.
// each calls fn with every block in order, releasing each after fn, and
// stops at the first error.
func (p *pipeline) each(fn func(*block) error) error {
	for {
		b, err := p.next()
		if err != nil || b == nil {
			return err
		}
		if err := fn(b); err != nil {
			return err
		}
		p.release(b)
	}
}

func (p *pipeline) release(b *block) {
	select {
	case p.free <- b:
	default:
	}
}

// close stops the pipeline and waits for its workers.
func (p *pipeline) close() {
	p.once.Do(func() { close(p.stop) })
	// Drain so the reader and workers can finish.
	for b := range p.out {
		<-b.done
	}
	p.wg.Wait()
}
