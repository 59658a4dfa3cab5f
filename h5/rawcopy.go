package h5

/*
#include "shim.h"
*/
import "C"

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"slices"
	"unsafe"
)

// Copying a matrix's stored chunks byte for byte: a matrix stored exactly
// as CreateMatrixOf writes one (element type and byte order, chunk shape,
// shuffle + deflate + Fletcher-32) need not be inflated and deflated again
// to be written into another file with the same encoding.

// RawCopyLevel reports whether the 2-D matrix d can be copied chunk by
// chunk into a matrix CreateMatrixOf(name, typ, cols, chunkRows,
// chunkCols, level) would make: element type typ, little-endian IEEE or
// signed integer; chunks chunkRows x min(chunkCols, columns); filters
// shuffle, deflate, Fletcher-32 in that order; every chunk of the extent
// listed in the chunk index exactly once, on the chunk grid, none stored
// with a filter skipped. level is the deflate level the dataset was
// created with (the output keeps it). Anything else (another byte order,
// contiguous storage, another chunk shape or filter, an incomplete index)
// is not ok and must be decoded and encoded again.
func (d *Dataset) RawCopyLevel(typ string, chunkRows, chunkCols int) (level int, ok bool) {
	if d.Type != typ || !d.ieeeLE || len(d.Shape) != 2 || d.Shape[1] <= 0 || chunkRows <= 0 || chunkCols <= 0 {
		return 0, false
	}
	chunk, filters, err := d.Layout()
	if err != nil || !slices.Equal(chunk, []int{chunkRows, min(chunkCols, d.Shape[1])}) ||
		!slices.Equal(filters, []string{"shuffle", "deflate", "fletcher32"}) {
		return 0, false
	}
	lockLib()
	var lv C.int
	rc := C.muarc_deflate_level(d.id, &lv)
	unlockLib()
	if rc < 0 || lv < 1 || lv > 9 {
		return 0, false
	}
	chunks, err := d.Chunks()
	if err != nil {
		return 0, false
	}
	want := ((d.Shape[0] + chunk[0] - 1) / chunk[0]) * ((d.Shape[1] + chunk[1] - 1) / chunk[1])
	if len(chunks) != want {
		return 0, false
	}
	seen := make(map[[2]int]bool, len(chunks))
	for _, c := range chunks {
		k := [2]int{c.Offset[0], c.Offset[1]}
		if c.Mask != 0 || k[0]%chunk[0] != 0 || k[1]%chunk[1] != 0 || k[0] >= d.Shape[0] || k[1] >= d.Shape[1] || seen[k] {
			return 0, false
		}
		seen[k] = true
	}
	return int(lv), true
}

// SourceError is an error of reading the source of CopyChunksFrom (a
// damaged chunk, a failed read), as opposed to one of writing the copy.
type SourceError struct{ Err error }

func (e *SourceError) Error() string { return e.Err.Error() }
func (e *SourceError) Unwrap() error { return e.Err }

// Level is the deflate level the matrix is written with.
func (w *MatrixWriter) Level() int { return w.level }

// CopyChunksFrom fills the empty matrix w with the stored chunks of src,
// byte for byte, in row-major chunk order, for a source RawCopyLevel
// accepted with w's type and chunk shape. Each chunk's Fletcher-32 is
// checked as it is copied (on another core, a few chunks behind): the
// first chunk that fails, in order, fails the copy with the error a
// decoding read gives (ErrChecksum, naming the source's chunk, inside a
// *SourceError like every error of reading the source), and the caller
// abandons the output, so a damaged source is never carried under a new
// file's name. band, when not nil, is called after each band of chunk
// rows with the number of rows in it.
func (w *MatrixWriter) CopyChunksFrom(src *Dataset, band func(rows int)) error {
	if w.rows != 0 || len(src.Shape) != 2 || src.Shape[1] != w.cols || src.Type != w.typ {
		return &Error{File: w.ds.file, Object: w.ds.path, Op: "copy chunks", Detail: fmt.Sprintf("source %s %v does not fit an empty %s matrix of %d columns", src.Type, src.Shape, w.typ, w.cols)}
	}
	rows := src.Shape[0]
	lockLib()
	dims := [2]C.hsize_t{C.hsize_t(rows), C.hsize_t(w.cols)}
	if C.muarc_dset_extend(w.ds.id, 2, &dims[0]) < 0 {
		err := fail(w.ds.file, w.ds.path, "extend")
		unlockLib()
		return err
	}
	unlockLib()
	// This goroutine moves the chunks (the library calls are serial);
	// another checks them, in order, a few chunks behind.
	type chunk struct {
		r, c int
		raw  []byte
	}
	free := make(chan []byte, 4)
	for range 4 {
		free <- nil
	}
	todo := make(chan chunk, 4)
	checked := make(chan error, 1)
	go func() {
		var err error
		for ch := range todo {
			if err == nil {
				err = src.checkFletcher(ch.raw, ch.r, ch.c)
			}
			free <- ch.raw
		}
		checked <- err
	}()
	finish := func(err error) error {
		close(todo)
		if cerr := <-checked; cerr != nil {
			return &SourceError{cerr} // the first damaged chunk, in order
		}
		return err
	}
	for r := 0; r < rows; r += w.chunkRows {
		for c := 0; c < w.cols; c += w.chunkCols {
			buf, err := src.storedFiltered(r, c, <-free)
			if err != nil {
				return finish(&SourceError{err})
			}
			// A chunk that fails its check is written all the same: the
			// copy then fails and is abandoned by the caller.
			if err := w.writeChunk(r, c, buf); err != nil {
				return finish(err)
			}
			todo <- chunk{r, c, buf}
		}
		n := min(w.chunkRows, rows-r)
		w.rows += n
		w.ds.Shape[0] = w.rows
		if band != nil {
			band(n)
		}
	}
	return finish(nil)
}

// SameStoredChunks reports whether the 2-D matrices d and e store the
// same chunks, byte for byte, at the same offsets, with the same element
// type, extent, chunk shape and filters: then they hold the same values.
// It reads every chunk of both raw (nothing is inflated). A chunk missing
// from either index is an error (ErrChunkMissing).
func (d *Dataset) SameStoredChunks(e *Dataset) (bool, error) {
	dc, df, err := d.Layout()
	if err != nil {
		return false, err
	}
	ec, ef, err := e.Layout()
	if err != nil {
		return false, err
	}
	if d.Type != e.Type || d.ieeeLE != e.ieeeLE || len(d.Shape) != 2 || !slices.Equal(d.Shape, e.Shape) ||
		len(dc) != 2 || !slices.Equal(dc, ec) || !slices.Equal(df, ef) {
		return false, nil
	}
	var a, b []byte
	for r := 0; r < d.Shape[0]; r += dc[0] {
		for c := 0; c < d.Shape[1]; c += dc[1] {
			if a, err = d.storedFiltered(r, c, a); err != nil {
				return false, err
			}
			if b, err = e.storedFiltered(r, c, b); err != nil {
				return false, err
			}
			if !bytes.Equal(a, b) {
				return false, nil
			}
		}
	}
	return true, nil
}

// storedChunk reads the stored bytes of the chunk at (row, col) of a 2-D
// dataset into buf (grown as needed), with the mask of the filters skipped
// in storing it. A chunk the index does not list is ErrChunkMissing.
func (d *Dataset) storedChunk(row, col int, buf []byte) ([]byte, uint, error) {
	off := [2]C.hsize_t{C.hsize_t(row), C.hsize_t(col)}
	var size C.hsize_t
	var mask C.uint
	lockLib()
	defer unlockLib()
	C.muarc_chunk_size(d.id, &off[0], &size)
	if size == 0 {
		return buf, 0, &Error{File: d.file, Object: d.path, Op: fmt.Sprintf("read chunk at row %d column %d", row, col), Detail: "not in the chunk index", sentinel: ErrChunkMissing}
	}
	if cap(buf) < int(size) {
		buf = make([]byte, int(size))
	}
	buf = buf[:int(size)]
	if C.muarc_chunk_read(d.id, &off[0], &mask, unsafe.Pointer(&buf[0])) < 0 {
		return buf, 0, fail(d.file, d.path, fmt.Sprintf("read chunk at row %d column %d", row, col))
	}
	return buf, uint(mask), nil
}

// storedFiltered is storedChunk refusing a chunk stored with a filter
// skipped (its bytes are not in the dataset's encoding).
func (d *Dataset) storedFiltered(row, col int, buf []byte) ([]byte, error) {
	buf, mask, err := d.storedChunk(row, col, buf)
	if err == nil && mask != 0 {
		err = &Error{File: d.file, Object: d.path, Op: fmt.Sprintf("read chunk at row %d column %d", row, col), Detail: "stored with a filter skipped"}
	}
	return buf, err
}

// checkFletcher checks the Fletcher-32 checksum in the last 4 bytes of a
// stored chunk (HDF5's filter: over the filtered bytes before it).
func (d *Dataset) checkFletcher(raw []byte, row, col int) error {
	if len(raw) < 4 || fletcher32(raw[:len(raw)-4]) != binary.LittleEndian.Uint32(raw[len(raw)-4:]) {
		return &Error{File: d.file, Object: d.path, Op: fmt.Sprintf("read chunk at row %d column %d", row, col),
			Detail: "data error detected by Fletcher32 checksum", sentinel: ErrChecksum}
	}
	return nil
}
