package convert

import (
	"fmt"
	"math"

	"muarc/record"
)

// SignalSource streams the data columns of a scanned signal file as a
// record.SampleSource: the second pass. Rows must be read in order from row
// 0; gaps found in the first pass come out as rows of NaN. Close it when
// done (a writer that stops early leaves parsing goroutines otherwise).
type SignalSource struct {
	s    *Signals
	p    *pipeline
	mode blockMode
	next int // next grid row to hand out
	cur  *block
	pos  int // next row within cur
	gap  int // index into s.Gaps
	nan  int64
	err  error
	// jitter tracking
	step   float64
	jitter float64
}

// Source returns the streaming reader of the data columns.
func (s *Signals) Source() *SignalSource { return &SignalSource{s: s} }

// Shape implements record.SampleSource.
func (src *SignalSource) Shape() (int, int) { return src.s.Samples, len(src.s.Labels) }

// ReadFloat32 implements record.SampleSource.
func (src *SignalSource) ReadFloat32(start int, dst []float32) error {
	return src.read(mode32, start, len(dst), func(i int, b *block, j int) {
		if b == nil {
			dst[i] = float32(math.NaN())
		} else {
			dst[i] = b.f32[j]
		}
	}, func(i int, b *block, j, n int) { copy(dst[i:i+n], b.f32[j:j+n]) })
}

// ReadFloat64 implements record.SampleSource.
func (src *SignalSource) ReadFloat64(start int, dst []float64) error {
	return src.read(mode64, start, len(dst), func(i int, b *block, j int) {
		if b == nil {
			dst[i] = math.NaN()
		} else {
			dst[i] = b.f64[j]
		}
	}, func(i int, b *block, j, n int) { copy(dst[i:i+n], b.f64[j:j+n]) })
}

// Close stops the second pass.
func (src *SignalSource) Close() error {
	if src.p != nil {
		src.p.close()
		src.p = nil
	}
	return nil
}

func (src *SignalSource) start(mode blockMode) {
	src.Close()
	src.mode, src.next, src.cur, src.pos, src.gap, src.err = mode, 0, nil, 0, 0, nil
	src.jitter = 0
	s := src.s
	if s.TimeUnit != "" && s.TimeUnit != "samples" {
		src.step = 1 / s.RateHz
		if s.TimeUnit == "ms" {
			src.step *= 1000
		}
	}
	s.resetStats()
	src.p = startPipeline(s.spec(mode, s.forced == record.Float32), s.lay.bodyOffset, s.lay.bodyLine)
}

func (src *SignalSource) read(mode blockMode, start, n int, one func(i int, b *block, j int), many func(i int, b *block, j, n int)) error {
	ch := len(src.s.Labels)
	if n%ch != 0 {
		return fmt.Errorf("convert: block of %d values is not a whole number of %d-channel rows", n, ch)
	}
	rows := n / ch
	if start < 0 || start+rows > src.s.Samples {
		return fmt.Errorf("convert: rows [%d,%d) outside 0..%d", start, start+rows, src.s.Samples)
	}
	if src.p == nil || start == 0 && src.next != 0 || src.mode != mode {
		if start != 0 {
			return fmt.Errorf("convert: %s is read in order from row 0", src.s.File)
		}
		src.start(mode)
	}
	if start != src.next {
		return fmt.Errorf("convert: %s is read in order (row %d asked, %d next)", src.s.File, start, src.next)
	}
	if src.err != nil {
		return src.err
	}
	i := 0
	for r := 0; r < rows; {
		// A gap before the next file row?
		if src.gap < len(src.s.Gaps) && src.s.Gaps[src.gap].Row <= int64(src.next) && int64(src.next) < src.s.Gaps[src.gap].Row+src.s.Gaps[src.gap].Missing {
			for c := 0; c < ch; c++ {
				one(i+c, nil, 0)
			}
			i += ch
			r++
			src.next++
			if int64(src.next) == src.s.Gaps[src.gap].Row+src.s.Gaps[src.gap].Missing {
				src.gap++
			}
			continue
		}
		if src.cur == nil || src.pos >= src.cur.rows {
			if src.cur != nil {
				src.p.release(src.cur)
				src.cur = nil
			}
			b, err := src.p.next()
			if err == nil && b == nil {
				err = fmt.Errorf("%s: file ended after %d rows, expected %d (did it change while it was read?)", src.s.File, src.next, src.s.Samples)
			}
			if err != nil {
				src.err = err
				src.Close()
				return err
			}
			if b.rows != len(b.times) && src.s.tcol >= 0 {
				src.err = fmt.Errorf("%s: internal: time cells do not match rows", src.s.File)
				return src.err
			}
			src.s.mergeStats(b)
			src.cur, src.pos = b, 0
			continue
		}
		// Copy as many rows of this block as fit before the next gap.
		take := min(rows-r, src.cur.rows-src.pos)
		if src.gap < len(src.s.Gaps) {
			take = min(take, int(src.s.Gaps[src.gap].Row)-src.next)
		}
		many(i, src.cur, src.pos*ch, take*ch)
		if src.step > 0 {
			s := src.s
			t0 := s.StartS
			if s.TimeUnit == "ms" {
				t0 *= 1000
			}
			for q := 0; q < take; q++ {
				t := src.cur.times[src.pos+q]
				k := src.next + q
				if d := math.Abs(t - (t0 + float64(k)*src.step)); d > src.jitter {
					src.jitter = d
				}
			}
		}
		i += take * ch
		r += take
		src.pos += take
		src.next += take
	}
	if src.next == src.s.Samples {
		j := src.jitter
		if src.s.TimeUnit == "ms" {
			j /= 1000
		}
		src.s.JitterS = j
		src.s.decideType(src.s.forced)
		// The file must end here.
		for src.cur != nil {
			if src.pos < src.cur.rows {
				return fmt.Errorf("%s: more rows than in the first pass (did it change while it was read?)", src.s.File)
			}
			src.p.release(src.cur)
			src.cur = nil
			b, err := src.p.next()
			if err != nil {
				return err
			}
			src.cur, src.pos = b, 0
		}
	}
	return nil
}

// Columns reads every data column into memory as float64 (force traces,
// small files). Gaps come out as NaN.
func (s *Signals) Columns() ([][]float64, error) {
	src := s.Source()
	defer src.Close()
	ch := len(s.Labels)
	out := make([][]float64, ch)
	for c := range out {
		out[c] = make([]float64, s.Samples)
	}
	const rows = 4096
	buf := make([]float64, rows*ch)
	for r := 0; r < s.Samples; r += rows {
		n := min(rows, s.Samples-r)
		if err := src.ReadFloat64(r, buf[:n*ch]); err != nil {
			return nil, err
		}
		for q := 0; q < n; q++ {
			for c := 0; c < ch; c++ {
				out[c][r+q] = buf[q*ch+c]
			}
		}
	}
	return out, nil
}

var _ record.SampleSource = (*SignalSource)(nil)
