package recfile

import (
	"errors"
	"fmt"

	"muarc/h5"
	"muarc/record"
)

// Samples read from a muarc file are copied chunk by chunk into the file
// being written when they would be written with exactly the encoding they
// have (h5.Dataset.RawCopyLevel): de-identification and rewriting a file
// never change sample values, so their chunks need not be inflated,
// unshuffled, shuffled and deflated again. Each chunk's Fletcher-32 is
// checked on the way, as a decoding read checks it.

// chunkShape is the sample chunk shape the options ask for.
func chunkShape(opt WriteOptions) (rows, cols int) {
	rows, cols = opt.ChunkRows, opt.ChunkCols
	if rows <= 0 {
		rows = DefaultChunkRows
	}
	if cols <= 0 {
		cols = DefaultChunkCols
	}
	return rows, cols
}

// storedMatrix is the dataset behind samples read from a muarc file (nil
// for any other source).
func storedMatrix(src record.SampleSource) *h5.Dataset {
	switch s := src.(type) {
	case *ArraySamples:
		return s.ds
	case *ArrayCounts:
		return s.s.ds
	}
	return nil
}

// rawSource returns the dataset whose stored chunks Write copies for ar's
// samples, with its deflate level, when it copies them (CopiesSamplesRaw).
func rawSource(ar *record.Array, opt WriteOptions) (*h5.Dataset, int, bool) {
	if opt.DecodeSamples {
		return nil, 0, false
	}
	ds := storedMatrix(ar.Samples)
	if ds == nil {
		return nil, 0, false
	}
	typ := string(ar.SampleType)
	if typ == "" {
		typ = string(record.Float32)
	}
	cs, counts := ar.Samples.(*ArrayCounts)
	if ar.SampleType.IsInteger() != counts || counts && !sameScale(cs.scale, ar.Scale) {
		return nil, 0, false // counts written as floats, or under another scale
	}
	cr, cc := chunkShape(opt)
	level, ok := ds.RawCopyLevel(typ, cr, cc)
	if !ok || opt.DeflateLevel != 0 && opt.DeflateLevel != level {
		return nil, 0, false
	}
	return ds, level, true
}

// CopiesSamplesRaw reports whether Write with opt copies the stored chunks
// of ar's samples byte for byte instead of decoding and encoding them: the
// samples were read from a muarc file (Open), in the element type the
// array asks for (integer counts under the same scale), chunked as opt
// asks, with shuffle + deflate + Fletcher-32 (any deflate level unless
// opt.DeflateLevel names another), every chunk in the index and none with
// a filter skipped; and opt.DecodeSamples is off. The copy keeps the
// source's deflate level.
func CopiesSamplesRaw(ar *record.Array, opt WriteOptions) bool {
	_, _, ok := rawSource(ar, opt)
	return ok
}

// copyRaw writes ar's samples as a copy of src's stored chunks.
func (w *writer) copyRaw(g *h5.Group, ar *record.Array, pos int, src *h5.Dataset, level int) error {
	_, cols := ar.Samples.Shape()
	cr, cc := chunkShape(w.opt)
	mw, err := g.CreateMatrixOf(dsSamples, src.Type, cols, cr, cc, level)
	if err != nil {
		return err
	}
	defer mw.Close()
	if err := mw.CopyChunksFrom(src, w.rowsDone); err != nil {
		var se *h5.SourceError
		if errors.As(err, &se) {
			err = &readError{se.Err}
		}
		return w.samplesErr(mw.Dataset().Path(), err)
	}
	if rows, _ := ar.Samples.Shape(); mw.Rows() != rows {
		return fmt.Errorf("%s: wrote %d of %d rows", mw.Dataset().Path(), mw.Rows(), rows)
	}
	if ar.SampleType.IsInteger() {
		if err := scaleAttrs(mw.Dataset(), ar); err != nil {
			return err
		}
	}
	if w.opt.SamplesCopied != nil {
		w.opt.SamplesCopied(w.trialPos, pos)
	}
	return nil
}

// SameStoredSamples reports whether two sample sources read from muarc
// files store the same chunks, byte for byte (h5.Dataset.SameStoredChunks:
// same type, extent, chunk shape and filters, hence the same values),
// reading them raw; ok is false when either comes from anywhere else.
func SameStoredSamples(a, b record.SampleSource) (same, ok bool, err error) {
	da, db := storedMatrix(a), storedMatrix(b)
	if da == nil || db == nil {
		return false, false, nil
	}
	same, err = da.SameStoredChunks(db)
	return same, true, err
}
