package validate

import (
	"errors"
	"fmt"
	"math"

	"muarc/recfile"
	"muarc/record"
)

// checkSamplesInfinite streams an array's EMG samples in bands of whole
// sample chunks (recfile.DefaultChunkRows rows, so each stored chunk is
// inflated once and memory stays one band) and adds one values.infinite
// finding with the count and the first ±Inf's row and channel. Samples
// stored as integer counts (with a scale factor) cannot hold an infinity
// and are not read. A band with a damaged chunk is skipped (the checksum
// scan names the chunk); any other read error ends the scan with a
// content.skipped note.
func checkSamplesInfinite(a *record.Array, ah, aj string, add addFunc) {
	if a.Samples == nil {
		return
	}
	wide := false
	switch a.SampleType {
	case "", record.Float32:
	case record.Float64:
		wide = true
	default:
		return // integer counts: no infinities possible
	}
	rows, cols := a.Samples.Shape()
	if rows == 0 || cols == 0 {
		return
	}
	band := recfile.DefaultChunkRows
	if band > rows {
		band = rows
	}
	var b32 []float32
	var b64 []float64
	if wide {
		b64 = make([]float64, band*cols)
	} else {
		b32 = make([]float32, band*cols)
	}
	var n int64
	skipped := 0
	firstRow, firstCol, firstVal := -1, -1, 0.0
	for r0 := 0; r0 < rows; r0 += band {
		nr := min(band, rows-r0)
		var err error
		if wide {
			err = a.Samples.ReadFloat64(r0, b64[:nr*cols])
		} else {
			err = a.Samples.ReadFloat32(r0, b32[:nr*cols])
		}
		if errors.Is(err, recfile.ErrChecksum) {
			skipped += nr // the checksum scan names the damaged chunk
			continue
		}
		if err != nil {
			add("content.skipped", ah+"/samples", aj+"/samples", "the file may be damaged",
				"the samples were checked for infinities up to sample %d only: %v", r0, err)
			break
		}
		for i := 0; i < nr*cols; i++ {
			var v float64
			if wide {
				v = b64[i]
			} else {
				v = float64(b32[i])
			}
			if math.IsInf(v, 0) {
				if n == 0 {
					firstRow, firstCol, firstVal = r0+i/cols, i%cols, v
				}
				n++
			}
		}
	}
	if n > 0 {
		label := ""
		if firstCol < len(a.Channels) {
			label = " (" + a.Channels[firstCol].Label + ")"
		}
		add("values.infinite", ah+"/samples", aj+"/samples", "store NaN for a sample not known, or the finite value; import refuses infinities unless --allow-out-of-range",
			"EMG samples hold %d %s (first at sample %d, channel %d%s: %v)%s", n, plural(int(n), "infinity", "infinities"), firstRow, firstCol+1, label, firstVal, skippedText(skipped))
	}
}

func skippedText(rows int) string {
	if rows == 0 {
		return ""
	}
	return fmt.Sprintf("; %d samples in damaged chunks not read", rows)
}
