package analysis

import (
	"fmt"
	"math"
	"runtime"
	"sort"
	"sync"

	"muarc/record"
)

// MUAPHalfWindowS is the half width of the spike-triggered averaging window:
// templates span -25 ms .. +25 ms around each discharge (common practice for
// surface MUAPs, whose duration is some 10-20 ms).
const MUAPHalfWindowS = 0.025

// Templates are the MUAP templates of one decomposition.
type Templates struct {
	// MUAPs holds the templates, [unit][channel][lag], in the array's unit,
	// in the decomposition's unit order. A unit with no discharge to
	// average has NaN values.
	MUAPs record.MUAPs
	// Averaged is, per unit, the number of discharges averaged; AtEdge the
	// number left out because their window runs past the first or last
	// sample.
	Averaged []int
	AtEdge   []int
	// IDs are the unit ids, in template order, and Names what people
	// see: the lab's labels, the id where a unit has none
	// (record.Unit.Name).
	IDs   []int64
	Names []string
	// PeakToPeak is, per unit and channel, max - min of the template over
	// its lags, in MUAPs.Unit.
	PeakToPeak [][]float64
}

// MUAPLags returns the first lag (samples, negative) and the number of lags
// of a window of ±halfWindowS at rateHz: round(halfWindowS*rateHz) samples on
// each side plus the discharge sample itself.
func MUAPLags(rateHz, halfWindowS float64) (firstLag, lags int) {
	h := int(math.Round(halfWindowS * rateHz))
	return -h, 2*h + 1
}

// ArrayTemplates averages the raw EMG of arr around the discharges of every
// unit of every decomposition of arr, in one sequential pass over
// arr.Samples (read in blocks of whole rows; memory is one block plus the
// templates, whatever the recording's length). It returns one Templates per
// decomposition, in order.
func ArrayTemplates(arr *record.Array, halfWindowS float64) ([]*Templates, error) {
	if arr.Samples == nil {
		return nil, fmt.Errorf("array %q has no samples to average", arr.Name)
	}
	if !(arr.SamplingRateHz > 0) {
		return nil, fmt.Errorf("array %q has no sampling rate", arr.Name)
	}
	firstLag, lags := MUAPLags(arr.SamplingRateHz, halfWindowS)
	var trains [][]int64
	for _, dec := range arr.Decompositions {
		for _, u := range dec.Units {
			trains = append(trains, u.Discharges)
		}
	}
	sums, counts, edge, err := averageTrains(arr.Samples, trains, firstLag, lags, 0)
	if err != nil {
		return nil, fmt.Errorf("array %q: %w", arr.Name, err)
	}
	_, nch := arr.Samples.Shape()
	out := make([]*Templates, len(arr.Decompositions))
	k := 0
	for di, dec := range arr.Decompositions {
		t := &Templates{MUAPs: record.MUAPs{Units: len(dec.Units), Channels: nch, Lags: lags,
			FirstLag: firstLag, Unit: arr.Unit, Data: make([]float32, len(dec.Units)*nch*lags)}}
		for ui := range dec.Units {
			t.IDs = append(t.IDs, dec.Units[ui].ID)
			t.Names = append(t.Names, dec.Units[ui].Name())
			t.Averaged = append(t.Averaged, counts[k])
			t.AtEdge = append(t.AtEdge, edge[k])
			p2p := make([]float64, nch)
			for c := 0; c < nch; c++ {
				lo, hi := math.Inf(1), math.Inf(-1)
				for l := 0; l < lags; l++ {
					v := math.NaN()
					if counts[k] > 0 {
						v = sums[k][l*nch+c] / float64(counts[k])
					}
					t.MUAPs.Data[(ui*nch+c)*lags+l] = float32(v)
					lo, hi = math.Min(lo, v), math.Max(hi, v)
				}
				p2p[c] = hi - lo
			}
			t.PeakToPeak = append(t.PeakToPeak, p2p)
			k++
		}
		out[di] = t
	}
	return out, nil
}

// defaultBlockRows is the number of sample rows read per block.
const defaultBlockRows = 8192

// flushEvery is how many windows a unit's float32 accumulator takes before
// it is added into the float64 sum: float32 adds are quicker, and a float32
// sum of 64 values keeps about 6 significant digits.
const flushEvery = 64

// averageTrains sums, for each train, the sample rows [d+firstLag,
// d+firstLag+lags) around each discharge d, reading src once from row 0
// upwards in blocks of blockRows rows (0: default). sums[u] is [lag][channel]
// flattened. The windows of one block are shared out over up to
// runtime.GOMAXPROCS(0) goroutines (at most 4) by unit, so no two
// goroutines add into one unit's sum.
func averageTrains(src record.SampleSource, trains [][]int64, firstLag, lags, blockRows int) (sums [][]float64, counts, edge []int, err error) {
	n, nch := src.Shape()
	if nch <= 0 {
		return nil, nil, nil, fmt.Errorf("samples have no channels")
	}
	type event struct {
		start int64
		unit  int
	}
	var ev []event
	sums = make([][]float64, len(trains))
	counts = make([]int, len(trains))
	edge = make([]int, len(trains))
	for u, tr := range trains {
		sums[u] = make([]float64, lags*nch)
		for _, d := range tr {
			s := d + int64(firstLag)
			if s < 0 || s+int64(lags) > int64(n) {
				edge[u]++
				continue
			}
			ev = append(ev, event{s, u})
		}
	}
	if len(ev) == 0 {
		return sums, counts, edge, nil
	}
	sort.Slice(ev, func(i, j int) bool { return ev[i].start < ev[j].start })
	if blockRows <= 0 {
		blockRows = defaultBlockRows
	}
	if blockRows < lags {
		blockRows = lags
	}
	workers := min(runtime.GOMAXPROCS(0), 4, len(trains))
	acc32 := make([][]float32, len(trains))
	pending := make([]int, len(trains))
	for u := range acc32 {
		acc32[u] = make([]float32, lags*nch)
	}
	flush := func(u int) {
		a, s := acc32[u], sums[u][:len(acc32[u])]
		for i, v := range a {
			s[i] += float64(v)
			a[i] = 0
		}
		pending[u] = 0
	}
	capRows := blockRows + lags
	buf := make([]float32, capRows*nch)
	bufStart, bufRows := 0, 0
	// Read only as far as the last window needs.
	last := int(ev[len(ev)-1].start) + lags
	next := 0
	win := lags * nch
	add := func(batch []event, w int) {
		for _, e := range batch {
			if e.unit%workers != w {
				continue
			}
			off := (int(e.start) - bufStart) * nch
			row := buf[off : off+win]
			addInto(acc32[e.unit][:win], row)
			counts[e.unit]++
			if pending[e.unit]++; pending[e.unit] == flushEvery {
				flush(e.unit)
			}
		}
	}
	// A reader goroutine reads the next block while this one averages the
	// current: the source is still read by one goroutine, in order.
	blocks := readAhead(src, last, blockRows, nch)
	defer blocks.stop()
	for bufStart+bufRows < last {
		blk, ok := <-blocks.full
		if !ok {
			break
		}
		if blk.err != nil {
			return nil, nil, nil, blk.err
		}
		copy(buf[bufRows*nch:], blk.data[:blk.rows*nch])
		bufRows += blk.rows
		blocks.free <- blk.data
		end := bufStart + bufRows
		first := next
		for next < len(ev) && int(ev[next].start)+lags <= end {
			next++
		}
		batch := ev[first:next]
		if workers > 1 && len(batch) >= 2*workers {
			var wg sync.WaitGroup
			for w := 0; w < workers; w++ {
				wg.Add(1)
				go func(w int) {
					defer wg.Done()
					add(batch, w)
				}(w)
			}
			wg.Wait()
		} else {
			for w := 0; w < workers; w++ {
				add(batch, w)
			}
		}
		if next == len(ev) {
			break
		}
		// Keep the rows a pending window may still need (fewer than lags).
		keep := min(max(end-int(ev[next].start), 0), bufRows)
		copy(buf, buf[(bufRows-keep)*nch:bufRows*nch])
		bufStart = end - keep
		bufRows = keep
	}
	if next != len(ev) {
		return nil, nil, nil, fmt.Errorf("samples ended before the last discharge window")
	}
	for u := range acc32 {
		if pending[u] > 0 {
			flush(u)
		}
	}
	return sums, counts, edge, nil
}

// addInto adds src into dst element by element (len(dst) == len(src)),
// eight at a time.
func addInto(dst, src []float32) {
	n := len(src) &^ 7
	dst = dst[:len(src)]
	for i := 0; i < n; i += 8 {
		d := dst[i : i+8 : i+8]
		s := src[i : i+8 : i+8]
		d[0] += s[0]
		d[1] += s[1]
		d[2] += s[2]
		d[3] += s[3]
		d[4] += s[4]
		d[5] += s[5]
		d[6] += s[6]
		d[7] += s[7]
	}
	for i := n; i < len(src); i++ {
		dst[i] += src[i]
	}
}

// block is one run of rows read ahead.
type block struct {
	data []float32
	rows int
	err  error
}

type reader struct {
	full chan block
	free chan []float32
	done chan struct{}
}

// stop ends the reader goroutine (and waits for nothing: it exits at its
// next send or receive).
func (r *reader) stop() { close(r.done) }

// readAhead reads rows [0, last) of src in blocks of blockRows rows on its
// own goroutine, two blocks ahead at most. Blocks are sent on full; their
// buffers must be handed back on free.
func readAhead(src record.SampleSource, last, blockRows, nch int) *reader {
	r := &reader{full: make(chan block, 1), free: make(chan []float32, 2), done: make(chan struct{})}
	for i := 0; i < 2; i++ {
		r.free <- make([]float32, blockRows*nch)
	}
	go func() {
		defer close(r.full)
		for pos := 0; pos < last; {
			var b []float32
			select {
			case b = <-r.free:
			case <-r.done:
				return
			}
			k := min(blockRows, last-pos)
			blk := block{data: b, rows: k}
			if err := src.ReadFloat32(pos, b[:k*nch]); err != nil {
				blk.err = fmt.Errorf("reading sample rows %d..%d: %w", pos, pos+k, err)
			}
			select {
			case r.full <- blk:
			case <-r.done:
				return
			}
			if blk.err != nil {
				return
			}
			pos += k
		}
	}()
	return r
}

// GridMap places per-channel values (e.g. peak-to-peak amplitudes) on the
// array's electrode grid: [row][column], NaN where no channel sits. Channels
// not on the grid are left out of the map.
func GridMap(arr *record.Array, perChannel []float64) [][]float64 {
	rows, cols := arr.Rows, arr.Columns
	for _, c := range arr.Channels {
		if c.Row+1 > rows {
			rows = c.Row + 1
		}
		if c.Column+1 > cols {
			cols = c.Column + 1
		}
	}
	m := make([][]float64, rows)
	for r := range m {
		m[r] = make([]float64, cols)
		for c := range m[r] {
			m[r][c] = math.NaN()
		}
	}
	for i, ch := range arr.Channels {
		if i < len(perChannel) && ch.Row >= 0 && ch.Column >= 0 {
			m[ch.Row][ch.Column] = perChannel[i]
		}
	}
	return m
}
