package record

import (
	"fmt"
	"math"
	"math/bits"
	"strconv"
)

// Integer sample types: the samples are stored as integer counts of a
// quantum (an amplifier's LSB, or the last digit a text file wrote) with a
// CountScale that turns them into physical values.
const (
	Int8  SampleType = "int8"
	Int16 SampleType = "int16"
	Int32 SampleType = "int32"
)

// IsInteger reports whether t stores integer counts.
func (t SampleType) IsInteger() bool { return t == Int8 || t == Int16 || t == Int32 }

// Bytes is the size of one stored sample of type t (4 for "", float32).
func (t SampleType) Bytes() int {
	switch t {
	case Int8:
		return 1
	case Int16:
		return 2
	case Float64:
		return 8
	}
	return 4
}

// CountRange is the range of counts t holds (0, -1 for a float type).
func (t SampleType) CountRange() (lo, hi int64) {
	switch t {
	case Int8:
		return math.MinInt8, math.MaxInt8
	case Int16:
		return math.MinInt16, math.MaxInt16
	case Int32:
		return math.MinInt32, math.MaxInt32
	}
	return 0, -1
}

// SmallestCountType is the smallest integer type holding every count in
// [lo, hi], or "" when int32 does not.
func SmallestCountType(lo, hi int64) SampleType {
	for _, t := range []SampleType{Int8, Int16, Int32} {
		a, b := t.CountRange()
		if lo >= a && hi <= b {
			return t
		}
	}
	return ""
}

// CountScale turns stored integer counts into physical values, with the
// names the CF metadata conventions use (section 8.1, "Packed Data"):
// physical = counts × ScaleFactor + AddOffset.
//
// Decimals ≥ 0 says the values were written as decimals with that many
// digits after the point: ScaleFactor and AddOffset are then the float64
// nearest to the decimals ScaleUnits / 10^Decimals and
// OffsetUnits / 10^Decimals, and the physical value of k counts is the
// decimal (k × ScaleUnits + OffsetUnits) / 10^Decimals, given as the
// float64 nearest to it (what a correct parser makes of the text written).
// Decimals < 0 (EDF and BDF calibration) says the physical value is
// counts × ScaleFactor + AddOffset evaluated in float64, a multiplication
// and an addition each rounded to nearest.
type CountScale struct {
	ScaleFactor, AddOffset  float64
	Decimals                int
	ScaleUnits, OffsetUnits int64
}

// maxExact is 2^53: integers below it are exact in float64.
const maxExact = 1 << 53

var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// MaxScaleDecimals is the most decimals a decimal CountScale may have
// (10^22 is the largest power of ten float64 holds exactly).
const MaxScaleDecimals = 22

// DecimalScale is the scale of counts of units × 10^-decimals with an
// offset of offsetUnits × 10^-decimals.
func DecimalScale(units, offsetUnits int64, decimals int) (CountScale, error) {
	if decimals < 0 || decimals > MaxScaleDecimals || units <= 0 || units >= maxExact || offsetUnits <= -maxExact || offsetUnits >= maxExact {
		return CountScale{}, fmt.Errorf("record: decimal scale %d, offset %d at %d decimals is out of range", units, offsetUnits, decimals)
	}
	return CountScale{
		ScaleFactor: float64(units) / pow10[decimals],
		AddOffset:   float64(offsetUnits) / pow10[decimals],
		Decimals:    decimals, ScaleUnits: units, OffsetUnits: offsetUnits,
	}, nil
}

// LinearScale is the scale physical = counts × scaleFactor + addOffset in
// float64 (EDF and BDF calibration).
func LinearScale(scaleFactor, addOffset float64) CountScale {
	return CountScale{ScaleFactor: scaleFactor, AddOffset: addOffset, Decimals: -1}
}

// ScaleFromAttrs rebuilds a scale from the stored attributes. With
// decimals ≥ 0 the integer units are recovered from the float64 attributes
// and must give them back exactly.
func ScaleFromAttrs(scaleFactor, addOffset float64, decimals int) (CountScale, error) {
	if math.IsNaN(scaleFactor) || math.IsInf(scaleFactor, 0) || scaleFactor == 0 || math.IsNaN(addOffset) || math.IsInf(addOffset, 0) {
		return CountScale{}, fmt.Errorf("scale_factor %g and add_offset %g must be finite and scale_factor non-zero", scaleFactor, addOffset)
	}
	if decimals < 0 {
		return LinearScale(scaleFactor, addOffset), nil
	}
	if decimals > MaxScaleDecimals {
		return CountScale{}, fmt.Errorf("text_decimals %d is above %d", decimals, MaxScaleDecimals)
	}
	u := math.Round(scaleFactor * pow10[decimals])
	o := math.Round(addOffset * pow10[decimals])
	if u <= 0 || u >= maxExact || math.Abs(o) >= maxExact {
		return CountScale{}, fmt.Errorf("scale_factor %g or add_offset %g is not a decimal with %d decimals", scaleFactor, addOffset, decimals)
	}
	s, err := DecimalScale(int64(u), int64(o), decimals)
	if err != nil {
		return s, err
	}
	if s.ScaleFactor != scaleFactor || s.AddOffset != addOffset {
		return CountScale{}, fmt.Errorf("scale_factor %g and add_offset %g are not the float64 of decimals with %d decimals (nearest: %s and %s)",
			scaleFactor, addOffset, decimals, string(s.AppendUnits(nil, s.ScaleUnits)), string(s.AppendUnits(nil, s.OffsetUnits)))
	}
	return s, nil
}

// Physical is the physical value of k counts.
func (s CountScale) Physical(k int64) float64 {
	if s.Decimals >= 0 {
		if m, ok := s.units(k); ok {
			return float64(m) / pow10[s.Decimals]
		}
	}
	// Explicit conversions keep the multiplication and the addition
	// separately rounded (the Go specification allows fusing them otherwise).
	return float64(float64(k)*s.ScaleFactor) + s.AddOffset
}

// units is k × ScaleUnits + OffsetUnits, ok false unless it is below
// 2^53 in magnitude (exact in float64).
func (s CountScale) units(k int64) (int64, bool) {
	a := uint64(k)
	if k < 0 {
		a = uint64(-k)
	}
	hi, lo := bits.Mul64(a, uint64(s.ScaleUnits))
	if hi != 0 || lo >= maxExact {
		return 0, false
	}
	m := int64(lo)
	if k < 0 {
		m = -m
	}
	m += s.OffsetUnits
	return m, m > -maxExact && m < maxExact
}

// Count is the count whose physical value is v exactly (bit for bit), ok
// false when there is none.
func (s CountScale) Count(v float64) (k int64, ok bool) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, false
	}
	var f float64
	if s.Decimals >= 0 {
		m := math.Round(v * pow10[s.Decimals])
		if math.Abs(m) >= maxExact {
			return 0, false
		}
		d := int64(m) - s.OffsetUnits
		if d%s.ScaleUnits != 0 {
			return 0, false
		}
		f = float64(d / s.ScaleUnits)
	} else {
		f = math.Round((v - s.AddOffset) / s.ScaleFactor)
	}
	if math.Abs(f) > math.MaxInt32 {
		return 0, false
	}
	k = int64(f)
	if math.Float64bits(s.Physical(k)) != math.Float64bits(v) {
		return 0, false
	}
	return k, true
}

// AppendText appends the decimal text of k counts as it was written: an
// optional '-', the integer digits (at least one), and for Decimals > 0 a
// '.' and exactly Decimals digits. Only for a decimal scale.
func (s CountScale) AppendText(b []byte, k int64) []byte {
	m, ok := s.units(k)
	if !ok {
		return strconv.AppendFloat(b, s.Physical(k), 'g', -1, 64)
	}
	return s.AppendUnits(b, m)
}

// AppendUnits appends m × 10^-Decimals as fixed-point decimal text.
func (s CountScale) AppendUnits(b []byte, m int64) []byte {
	d := max(s.Decimals, 0)
	u := uint64(m)
	if m < 0 {
		b = append(b, '-')
		u = uint64(-m)
	}
	var digits [24]byte
	t := strconv.AppendUint(digits[:0], u, 10)
	if d == 0 {
		return append(b, t...)
	}
	if len(t) <= d {
		b = append(b, '0', '.')
		for i := len(t); i < d; i++ {
			b = append(b, '0')
		}
		return append(b, t...)
	}
	b = append(b, t[:len(t)-d]...)
	b = append(b, '.')
	return append(b, t[len(t)-d:]...)
}

// CountSource is a SampleSource of integer counts: ReadFloat32 and
// ReadFloat64 give physical values (Scale applied), ReadCounts the counts.
type CountSource interface {
	SampleSource
	// Scale is how counts become physical values.
	Scale() CountScale
	// ReadCounts fills dst with the counts of rows
	// [start, start+len(dst)/channels), row-major.
	ReadCounts(start int, dst []int32) error
}

// MemCounts is a CountSource held in memory: Counts row-major,
// Samples*Channels long.
type MemCounts struct {
	Samples, Channels int
	Counts            []int32
	CountScale        CountScale
}

// Shape implements SampleSource.
func (m *MemCounts) Shape() (int, int) { return m.Samples, m.Channels }

// Scale implements CountSource.
func (m *MemCounts) Scale() CountScale { return m.CountScale }

func (m *MemCounts) span(start, n int) (int, int, error) {
	return (&MemSamples{Samples: m.Samples, Channels: m.Channels}).span(start, n)
}

// ReadCounts implements CountSource.
func (m *MemCounts) ReadCounts(start int, dst []int32) error {
	a, b, err := m.span(start, len(dst))
	if err != nil {
		return err
	}
	copy(dst, m.Counts[a:b])
	return nil
}

// ReadFloat64 implements SampleSource: physical values.
func (m *MemCounts) ReadFloat64(start int, dst []float64) error {
	a, b, err := m.span(start, len(dst))
	if err != nil {
		return err
	}
	for i, k := range m.Counts[a:b] {
		dst[i] = m.CountScale.Physical(int64(k))
	}
	return nil
}

// ReadFloat32 implements SampleSource: physical values rounded to float32.
func (m *MemCounts) ReadFloat32(start int, dst []float32) error {
	a, b, err := m.span(start, len(dst))
	if err != nil {
		return err
	}
	for i, k := range m.Counts[a:b] {
		dst[i] = float32(m.CountScale.Physical(int64(k)))
	}
	return nil
}
