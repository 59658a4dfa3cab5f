package record

import "fmt"

// SampleSource provides an EMG sample matrix [sample, channel] in blocks of
// whole rows. Writers read a source sequentially from row 0 upwards; a source
// may refuse other access patterns with an error.
type SampleSource interface {
	// Shape returns the number of samples (rows) and channels (columns).
	Shape() (samples, channels int)
	// ReadFloat32 fills dst with rows [start, start+len(dst)/channels) in
	// row-major order. len(dst) must be a multiple of channels.
	ReadFloat32(start int, dst []float32) error
	// ReadFloat64 is ReadFloat32 for float64 values.
	ReadFloat64(start int, dst []float64) error
}

// MemSamples is a SampleSource held in memory. Exactly one of F32 and F64 is
// set, row-major, Samples*Channels long.
type MemSamples struct {
	Samples, Channels int
	F32               []float32
	F64               []float64
}

// Shape implements SampleSource.
func (m *MemSamples) Shape() (int, int) { return m.Samples, m.Channels }

func (m *MemSamples) span(start, n int) (int, int, error) {
	if m.Channels <= 0 || n%m.Channels != 0 {
		return 0, 0, fmt.Errorf("record: block of %d values is not a whole number of %d-channel rows", n, m.Channels)
	}
	rows := n / m.Channels
	if start < 0 || start+rows > m.Samples {
		return 0, 0, fmt.Errorf("record: rows [%d,%d) outside 0..%d", start, start+rows, m.Samples)
	}
	return start * m.Channels, start*m.Channels + n, nil
}

// ReadFloat32 implements SampleSource. Float64 data is rounded to float32.
func (m *MemSamples) ReadFloat32(start int, dst []float32) error {
	a, b, err := m.span(start, len(dst))
	if err != nil {
		return err
	}
	convertInto(dst, m.F32, m.F64, a, b)
	return nil
}

// convertInto fills dst with elements a..b of same when it is set, else of
// other converted.
func convertInto[D, S float32 | float64](dst, same []D, other []S, a, b int) {
	if same != nil {
		copy(dst, same[a:b])
		return
	}
	for i, v := range other[a:b] {
		dst[i] = D(v)
	}
}

// ReadFloat64 implements SampleSource.
func (m *MemSamples) ReadFloat64(start int, dst []float64) error {
	a, b, err := m.span(start, len(dst))
	if err != nil {
		return err
	}
	convertInto(dst, m.F64, m.F32, a, b)
	return nil
}
