package recfile

import (
	"errors"
	"fmt"
	"math"

	"muarc/h5"
	"muarc/record"
)

// Integer samples (since 1.2): counts with the CF attributes scale_factor
// and add_offset on the samples dataset, the CF attribute units, and
// text_decimals when the counts came from decimal text.
const (
	AttrScaleFactor  = "scale_factor"
	AttrAddOffset    = "add_offset"
	AttrUnits        = "units"
	AttrTextDecimals = "text_decimals"
)

// checkScale refuses integer samples without a usable scale.
func checkScale(where string, a *record.Array) error {
	s := a.Scale
	if _, err := record.ScaleFromAttrs(s.ScaleFactor, s.AddOffset, s.Decimals); err != nil {
		return invalid(where, "integer samples need a scale: %v", err)
	}
	if cs, ok := a.Samples.(record.CountSource); ok && !sameScale(cs.Scale(), s) {
		return invalid(where, "the samples' counts have scale %g / %g, the array says %g / %g", cs.Scale().ScaleFactor, cs.Scale().AddOffset, s.ScaleFactor, s.AddOffset)
	}
	return nil
}

func sameScale(a, b record.CountScale) bool {
	return math.Float64bits(a.ScaleFactor) == math.Float64bits(b.ScaleFactor) &&
		math.Float64bits(a.AddOffset) == math.Float64bits(b.AddOffset) && (a.Decimals < 0) == (b.Decimals < 0) &&
		(a.Decimals < 0 || a.Decimals == b.Decimals)
}

// counts streams integer samples: the counts of a CountSource as they are,
// or the counts whose physical values are exactly those of another source
// (an error names the first value that has none).
func (w *writer) counts(g *h5.Group, ar *record.Array, cr, cc, level int) error {
	rows, cols := ar.Samples.Shape()
	lo, hi := ar.SampleType.CountRange()
	mw, err := g.CreateMatrixOf(dsSamples, string(ar.SampleType), cols, cr, cc, level)
	if err != nil {
		return err
	}
	defer mw.Close()
	path := mw.Dataset().Path()
	cs, direct := ar.Samples.(record.CountSource)
	type band struct {
		k []int32
		f []float64
	}
	var bufs [2]*band
	for i := range bufs {
		bufs[i] = &band{k: make([]int32, cr*cols)}
		if !direct {
			bufs[i].f = make([]float64, cr*cols)
		}
	}
	fill := func(b *band, r, n int) error {
		b.k = b.k[:n*cols]
		if direct {
			if err := cs.ReadCounts(r, b.k); err != nil {
				return err
			}
		} else {
			b.f = b.f[:n*cols]
			if err := ar.Samples.ReadFloat64(r, b.f); err != nil {
				return err
			}
			for i, v := range b.f {
				k, ok := ar.Scale.Count(v)
				if !ok {
					return fmt.Errorf("row %d channel %d: %v is no whole number of counts of %g (offset %g); store the array as float", r+i/cols, i%cols, v, ar.Scale.ScaleFactor, ar.Scale.AddOffset)
				}
				b.k[i] = int32(k)
			}
		}
		for i, k := range b.k {
			if int64(k) < lo || int64(k) > hi {
				return fmt.Errorf("row %d channel %d: %d counts do not fit %s", r+i/cols, i%cols, k, ar.SampleType)
			}
		}
		return nil
	}
	var i8 []int8
	var i16 []int16
	err = readAhead(rows, cr, bufs, fill, func(b *band) error {
		var err error
		switch ar.SampleType {
		case record.Int8:
			i8 = narrow(i8, b.k)
			err = mw.WriteBandInt8(i8)
		case record.Int16:
			i16 = narrow(i16, b.k)
			err = mw.WriteBandInt16(i16)
		default:
			err = mw.WriteBandInt32(b.k)
		}
		if err == nil {
			w.rowsDone(len(b.k) / cols)
		}
		return err
	})
	if err != nil {
		return w.samplesErr(path, err)
	}
	if mw.Rows() != rows {
		return fmt.Errorf("%s: wrote %d of %d rows", path, mw.Rows(), rows)
	}
	return scaleAttrs(mw.Dataset(), ar)
}

// scaleAttrs writes the CF attributes of integer samples on their dataset.
func scaleAttrs(d *h5.Dataset, ar *record.Array) error {
	var a attrs
	a.any(AttrScaleFactor, ar.Scale.ScaleFactor)
	a.any(AttrAddOffset, ar.Scale.AddOffset)
	a.str(AttrUnits, ar.Unit)
	if ar.Scale.Decimals >= 0 {
		a.any(AttrTextDecimals, int64(ar.Scale.Decimals))
	}
	return a.write(d, nil)
}

func narrow[T int8 | int16](dst []T, k []int32) []T {
	dst = dst[:0]
	for _, v := range k {
		dst = append(dst, T(v))
	}
	return dst
}

// readScale reads the scale attributes of an integer samples dataset.
func (f *File) readScale(d *h5.Dataset) (record.CountScale, error) {
	as, err := d.Attrs()
	if err != nil {
		return record.CountScale{}, err
	}
	a := newAttrGet(f.path, d.Path(), as)
	a.required(AttrScaleFactor)
	sf, ao := a.num(AttrScaleFactor), a.num(AttrAddOffset)
	if math.IsNaN(ao) {
		ao = 0 // CF: add_offset defaults to 0
	}
	dec := -1
	if _, ok := a.m[AttrTextDecimals]; ok {
		dec = a.int(AttrTextDecimals)
	}
	a.str(AttrUnits)
	if a.err != nil {
		return record.CountScale{}, a.err
	}
	s, err := record.ScaleFromAttrs(sf, ao, dec)
	if err != nil {
		return s, formatErr(f.path, d.Path(), "integer samples need scale_factor (and add_offset, text_decimals) as LAYOUT.md gives them", "%v", err)
	}
	return s, nil
}

// ArrayCounts is the file-backed record.CountSource of an array stored as
// integer counts: ReadFloat32/64 give physical values.
type ArrayCounts struct {
	s     *ArraySamples // a named field: reflection over a recording stops here
	scale record.CountScale
}

// Shape implements record.SampleSource.
func (s *ArrayCounts) Shape() (int, int) { return s.s.rows, s.s.cols }

// Scale implements record.CountSource.
func (s *ArrayCounts) Scale() record.CountScale { return s.scale }

// ReadCounts implements record.CountSource.
func (s *ArrayCounts) ReadCounts(start int, dst []int32) error {
	if len(dst)%s.s.cols != 0 {
		return errors.New("recfile: block is not whole rows")
	}
	return s.ReadRangeCounts(start, len(dst)/s.s.cols, 0, s.s.cols, dst)
}

// ReadRangeCounts is ReadRange32 giving the stored counts.
func (s *ArrayCounts) ReadRangeCounts(row0, rows, ch0, nch int, dst []int32) error {
	if row0 < 0 || rows < 0 || ch0 < 0 || nch < 0 || row0+rows > s.s.rows || ch0+nch > s.s.cols {
		return fmt.Errorf("recfile: range rows %d+%d channels %d+%d outside %dx%d", row0, rows, ch0, nch, s.s.rows, s.s.cols)
	}
	return s.s.ds.ReadRectInt32(row0, rows, ch0, nch, dst)
}

// ReadFloat32 implements record.SampleSource: physical values.
func (s *ArrayCounts) ReadFloat32(start int, dst []float32) error {
	if len(dst)%s.s.cols != 0 {
		return errors.New("recfile: block is not whole rows")
	}
	return s.ReadRange32(start, len(dst)/s.s.cols, 0, s.s.cols, dst)
}

// ReadFloat64 implements record.SampleSource: physical values.
func (s *ArrayCounts) ReadFloat64(start int, dst []float64) error {
	if len(dst)%s.s.cols != 0 {
		return errors.New("recfile: block is not whole rows")
	}
	return s.ReadRange64(start, len(dst)/s.s.cols, 0, s.s.cols, dst)
}

// ReadRange32 reads physical values of a range as float32 (each the
// float32 nearest to the float64 physical value).
func (s *ArrayCounts) ReadRange32(row0, rows, ch0, nch int, dst []float32) error {
	k := make([]int32, len(dst))
	if err := s.ReadRangeCounts(row0, rows, ch0, nch, k); err != nil {
		return err
	}
	for i, v := range k {
		dst[i] = float32(s.scale.Physical(int64(v)))
	}
	return nil
}

// ReadRange64 reads physical values of a range.
func (s *ArrayCounts) ReadRange64(row0, rows, ch0, nch int, dst []float64) error {
	k := make([]int32, len(dst))
	if err := s.ReadRangeCounts(row0, rows, ch0, nch, k); err != nil {
		return err
	}
	for i, v := range k {
		dst[i] = s.scale.Physical(int64(v))
	}
	return nil
}

var _ record.CountSource = (*ArrayCounts)(nil)
