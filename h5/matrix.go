package h5

/*
#include "shim.h"
*/
import "C"

import (
	"encoding/binary"
	"fmt"
	"runtime"
	"sync"
	"unsafe"
)

// MatrixWriter streams a 2-D [row, column] numeric dataset (float32,
// float64, int8, int16 or int32), extendible in rows,
// chunked [ChunkRows, ChunkCols], with shuffle + deflate + Fletcher-32. Rows
// arrive in bands of ChunkRows rows; each band is cut into chunks that are
// shuffled, compressed and checksummed in parallel in Go and written with
// direct chunk writes, so the library's filter pipeline is not on the write
// path. Readers decode the chunks with the standard filters.
type MatrixWriter struct {
	ds                   *Dataset
	cols, elem           int
	chunkRows, chunkCols int
	level                int
	rows                 int
	typ                  string
	workers              int
	// per-worker scratch, reused across bands
	scratch []chunkScratch
}

type chunkScratch struct {
	raw, shuf, comp []byte
	compressor      unsafe.Pointer // libdeflate compressor of this worker
}

// CreateMatrix creates an empty float matrix dataset with cols columns. f64
// picks float64 elements (else float32); level is the compression level
// (1-9, libdeflate's scale; any level gives standard zlib streams).
func (g *Group) CreateMatrix(name string, cols int, f64 bool, chunkRows, chunkCols, level int) (*MatrixWriter, error) {
	typ := "float32"
	if f64 {
		typ = "float64"
	}
	return g.CreateMatrixOf(name, typ, cols, chunkRows, chunkCols, level)
}

// CreateMatrixOf is CreateMatrix for an element type named "float32",
// "float64", "int8", "int16" or "int32" (little-endian, signed).
func (g *Group) CreateMatrixOf(name, typ string, cols int, chunkRows, chunkCols, level int) (*MatrixWriter, error) {
	if cols <= 0 || chunkRows <= 0 || chunkCols <= 0 || level < 1 || level > 9 {
		return nil, &Error{File: g.file, Object: g.child(name), Op: "create matrix", Detail: fmt.Sprintf("bad geometry cols=%d chunk=%dx%d level=%d", cols, chunkRows, chunkCols, level)}
	}
	chunkCols = min(chunkCols, cols)
	var ftype C.hid_t
	var elem int
	switch typ {
	case "float32":
		ftype, elem = C.H5T_IEEE_F32LE_g, 4
	case "float64":
		ftype, elem = C.H5T_IEEE_F64LE_g, 8
	case "int8":
		ftype, elem = C.H5T_STD_I8LE_g, 1
	case "int16":
		ftype, elem = C.H5T_STD_I16LE_g, 2
	case "int32":
		ftype, elem = C.H5T_STD_I32LE_g, 4
	default:
		return nil, &Error{File: g.file, Object: g.child(name), Op: "create matrix", Detail: fmt.Sprintf("element type %q (want float32, float64, int8, int16 or int32)", typ)}
	}
	cname := C.CString(name)
	defer C.free(unsafe.Pointer(cname))
	lockLib()
	dims := [2]C.hsize_t{0, C.hsize_t(cols)}
	maxd := [2]C.hsize_t{C.H5S_UNLIMITED, C.hsize_t(cols)}
	chunk := [2]C.hsize_t{C.hsize_t(chunkRows), C.hsize_t(chunkCols)}
	id := C.muarc_dset_create(g.id, cname, ftype, 2, &dims[0], &maxd[0], &chunk[0], 1, C.int(level), 1)
	if id < 0 {
		err := fail(g.file, g.child(name), "create matrix")
		unlockLib()
		return nil, err
	}
	unlockLib()
	w := &MatrixWriter{
		ds:   &Dataset{obj: obj{id: id, file: g.file, path: g.child(name)}, Type: typ, Shape: []int{0, cols}, MaxShape: []int{-1, cols}},
		cols: cols, elem: elem, chunkRows: chunkRows, chunkCols: chunkCols, level: level, typ: typ,
		workers: runtime.GOMAXPROCS(0),
	}
	w.scratch = make([]chunkScratch, w.workers)
	for i := range w.scratch {
		w.scratch[i].compressor = C.muarc_compressor_new(C.int(level))
		if w.scratch[i].compressor == nil {
			w.freeCompressors()
			w.ds.Close()
			return nil, &Error{File: g.file, Object: g.child(name), Op: "create matrix", Detail: "cannot allocate a compressor"}
		}
	}
	return w, nil
}

// Dataset is the dataset being written (for attributes).
func (w *MatrixWriter) Dataset() *Dataset { return w.ds }

// BandRows is the number of rows WriteBand takes at a time.
func (w *MatrixWriter) BandRows() int { return w.chunkRows }

// Rows is the number of rows written so far.
func (w *MatrixWriter) Rows() int { return w.rows }

// WriteBand32 appends up to BandRows rows of float32 (row-major, len a
// multiple of the column count). Only the last band may be short.
func (w *MatrixWriter) WriteBand32(data []float32) error { return writeTyped(w, "float32", data) }

// WriteBand64 is WriteBand32 for a float64 matrix.
func (w *MatrixWriter) WriteBand64(data []float64) error { return writeTyped(w, "float64", data) }

// WriteBandInt8 is WriteBand32 for an int8 matrix.
func (w *MatrixWriter) WriteBandInt8(data []int8) error { return writeTyped(w, "int8", data) }

// WriteBandInt16 is WriteBand32 for an int16 matrix.
func (w *MatrixWriter) WriteBandInt16(data []int16) error { return writeTyped(w, "int16", data) }

// WriteBandInt32 is WriteBand32 for an int32 matrix.
func (w *MatrixWriter) WriteBandInt32(data []int32) error { return writeTyped(w, "int32", data) }

func writeTyped[T float32 | float64 | int8 | int16 | int32](w *MatrixWriter, typ string, data []T) error {
	if w.typ != typ {
		return fmt.Errorf("%s: %s: %s matrix given %s rows", w.ds.file, w.ds.path, w.typ, typ)
	}
	var b []byte
	if len(data) > 0 {
		b = unsafe.Slice((*byte)(unsafe.Pointer(&data[0])), int(unsafe.Sizeof(data[0]))*len(data))
	}
	return w.writeBand(b)
}

func (w *MatrixWriter) writeBand(band []byte) error {
	rowBytes := w.cols * w.elem
	if len(band)%rowBytes != 0 {
		return fmt.Errorf("%s: %s: band of %d bytes is not whole rows of %d columns", w.ds.file, w.ds.path, len(band), w.cols)
	}
	n := len(band) / rowBytes
	if n == 0 {
		return nil
	}
	if n > w.chunkRows {
		return fmt.Errorf("%s: %s: band of %d rows exceeds the chunk height %d", w.ds.file, w.ds.path, n, w.chunkRows)
	}
	if w.rows%w.chunkRows != 0 {
		return fmt.Errorf("%s: %s: a short band was already written; only the last band may be short", w.ds.file, w.ds.path)
	}
	lockLib()
	dims := [2]C.hsize_t{C.hsize_t(w.rows + n), C.hsize_t(w.cols)}
	if C.muarc_dset_extend(w.ds.id, 2, &dims[0]) < 0 {
		err := fail(w.ds.file, w.ds.path, "extend")
		unlockLib()
		return err
	}
	unlockLib()
	// Each worker compresses a chunk into its own buffer and writes it
	// under the library lock while the others go on compressing, so no
	// band of compressed chunks is ever held.
	nchunks := (w.cols + w.chunkCols - 1) / w.chunkCols
	errs := make([]error, nchunks)
	var wg sync.WaitGroup
	next := make(chan int, nchunks)
	for c := 0; c < nchunks; c++ {
		next <- c
	}
	close(next)
	for k := 0; k < min(w.workers, nchunks); k++ {
		wg.Add(1)
		go func(s *chunkScratch) {
			defer wg.Done()
			for c := range next {
				data, err := w.encode(s, band, n, c)
				if err == nil {
					err = w.writeChunk(w.rows, c*w.chunkCols, data)
				}
				errs[c] = err
			}
		}(&w.scratch[k])
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	w.rows += n
	w.ds.Shape[0] = w.rows
	return nil
}

func (w *MatrixWriter) writeChunk(row, col int, data []byte) error {
	lockLib()
	defer unlockLib()
	off := [2]C.hsize_t{C.hsize_t(row), C.hsize_t(col)}
	if C.muarc_chunk_write(w.ds.id, &off[0], C.size_t(len(data)), unsafe.Pointer(&data[0])) < 0 {
		return fail(w.ds.file, w.ds.path, fmt.Sprintf("write chunk at row %d column %d", row, col))
	}
	return nil
}

// encode gathers chunk c of the band (padding with zeros past the data, as
// HDF5 stores whole chunks), then shuffles, deflates and appends the
// Fletcher-32 checksum.
func (w *MatrixWriter) encode(s *chunkScratch, band []byte, n, c int) ([]byte, error) {
	cc := w.chunkCols
	size := w.chunkRows * cc * w.elem
	if cap(s.raw) < size {
		s.raw = make([]byte, size)
		s.shuf = make([]byte, size)
		s.comp = make([]byte, int(C.muarc_deflate_bound(s.compressor, C.size_t(size)))+4)
	}
	raw, shuf := s.raw[:size], s.shuf[:size]
	col0 := c * cc
	width := min(cc, w.cols-col0) * w.elem
	rowBytes := w.cols * w.elem
	for r := 0; r < w.chunkRows; r++ {
		dst := raw[r*cc*w.elem : (r+1)*cc*w.elem]
		if r < n {
			copy(dst, band[r*rowBytes+col0*w.elem:r*rowBytes+col0*w.elem+width])
			clear(dst[width:])
		} else {
			clear(dst)
		}
	}
	shuffle(shuf, raw, w.elem)
	dn := C.size_t(len(s.comp) - 4)
	if C.muarc_deflate(s.compressor, unsafe.Pointer(&shuf[0]), C.size_t(size), unsafe.Pointer(&s.comp[0]), &dn) < 0 {
		return nil, fmt.Errorf("%s: %s: deflate failed", w.ds.file, w.ds.path)
	}
	comp := s.comp[:int(dn)+4]
	binary.LittleEndian.PutUint32(comp[dn:], fletcher32(comp[:dn]))
	return comp, nil
}

// Close finishes the matrix and releases its handle.
func (w *MatrixWriter) Close() error {
	w.freeCompressors()
	return w.ds.Close()
}

func (w *MatrixWriter) freeCompressors() {
	for i := range w.scratch {
		if w.scratch[i].compressor != nil {
			C.muarc_compressor_free(w.scratch[i].compressor)
			w.scratch[i].compressor = nil
		}
	}
}
