package analysis

import (
	"fmt"
	"math"
	"sort"

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
	// IDs are the unit ids, in template order.
	IDs []int64
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

// averageTrains sums, for each train, the sample rows [d+firstLag,
// d+firstLag+lags) around each discharge d, reading src once from row 0
// upwards in blocks of blockRows rows (0: default). sums[u] is [lag][channel]
// flattened.
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
	capRows := blockRows + lags
	buf := make([]float32, capRows*nch)
	bufStart, bufRows := 0, 0
	// Read only as far as the last window needs.
	last := int(ev[len(ev)-1].start) + lags
	next := 0
	for {
		want := capRows - bufRows
		if bufStart+bufRows+want > last {
			want = last - bufStart - bufRows
		}
		if want > 0 {
			if err := src.ReadFloat32(bufStart+bufRows, buf[bufRows*nch:(bufRows+want)*nch]); err != nil {
				return nil, nil, nil, fmt.Errorf("reading sample rows %d..%d: %w", bufStart+bufRows, bufStart+bufRows+want, err)
			}
			bufRows += want
		}
		end := bufStart + bufRows
		for next < len(ev) && int(ev[next].start)+lags <= end {
			e := ev[next]
			off := (int(e.start) - bufStart) * nch
			acc := sums[e.unit]
			win := buf[off : off+lags*nch]
			for i, v := range win {
				acc[i] += float64(v)
			}
			counts[e.unit]++
			next++
		}
		if next == len(ev) {
			break
		}
		// Keep the rows a pending window may still need.
		keep := end - int(ev[next].start)
		if keep > bufRows {
			keep = bufRows
		}
		if keep < 0 {
			keep = 0
		}
		copy(buf, buf[(bufRows-keep)*nch:bufRows*nch])
		bufStart = end - keep
		bufRows = keep
	}
	return sums, counts, edge, nil
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
