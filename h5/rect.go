package h5

/*
#include "shim.h"
*/
import "C"

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"
	"unsafe"
)

// rectPlan is what a fast rectangle read needs to know about a matrix.
type rectPlan struct {
	ok       bool // chunks are [shuffle,] deflate, fletcher32 little-endian IEEE float32/64 or int8/16/32
	shuffled bool
	integer  bool
	chunk    []int
	elem     int
}

func (d *Dataset) plan() *rectPlan {
	d.planOnce.Do(func() {
		p := &rectPlan{}
		d.rect = p
		elem := map[string]int{"float32": 4, "float64": 8, "int8": 1, "int16": 2, "int32": 4}[d.Type]
		if len(d.Shape) != 2 || elem == 0 || !d.ieeeLE {
			return
		}
		chunk, filters, err := d.Layout()
		if err != nil || len(chunk) != 2 {
			return
		}
		p.chunk, p.elem, p.integer = chunk, elem, d.Type[0] == 'i'
		switch {
		case slices.Equal(filters, []string{"shuffle", "deflate", "fletcher32"}):
			p.ok, p.shuffled = true, true
		case slices.Equal(filters, []string{"deflate", "fletcher32"}):
			p.ok = true
		}
	})
	return d.rect
}

// ReadRect32 reads rows [r0, r0+nr) and columns [c0, c0+nc) of a 2-D float
// matrix into dst (row-major nr x nc), converting to float32. For matrices
// stored as muarc writes them (shuffle, deflate, Fletcher-32) the chunks are
// read raw, checked, inflated and unshuffled in parallel outside the
// library lock; anything else goes through the library's own pipeline.
func (d *Dataset) ReadRect32(r0, nr, c0, nc int, dst []float32) error {
	return d.readRect(r0, nr, c0, nc, dst, nil)
}

// ReadRect64 is ReadRect32 converting to float64.
func (d *Dataset) ReadRect64(r0, nr, c0, nc int, dst []float64) error {
	return d.readRect(r0, nr, c0, nc, nil, dst)
}

// ReadRectInt32 is ReadRect32 for an integer matrix (int8, int16 or
// int32), giving the stored integers.
func (d *Dataset) ReadRectInt32(r0, nr, c0, nc int, dst []int32) error {
	if d.Type != "int8" && d.Type != "int16" && d.Type != "int32" {
		return &Error{File: d.file, Object: d.path, Op: "read", Detail: "stored as " + d.Type + ", expected int8, int16 or int32"}
	}
	return d.readRectAny(r0, nr, c0, nc, rectDst{i32: dst})
}

// rectDst is the destination of a rectangle read: exactly one is set.
type rectDst struct {
	f32 []float32
	f64 []float64
	i32 []int32
}

func (t rectDst) len() int { return len(t.f32) + len(t.f64) + len(t.i32) }

func (d *Dataset) readRect(r0, nr, c0, nc int, d32 []float32, d64 []float64) error {
	return d.readRectAny(r0, nr, c0, nc, rectDst{f32: d32, f64: d64})
}

func (d *Dataset) readRectAny(r0, nr, c0, nc int, dst rectDst) error {
	if len(d.Shape) != 2 || r0 < 0 || nr < 0 || c0 < 0 || nc < 0 || r0+nr > d.Shape[0] || c0+nc > d.Shape[1] {
		return &Error{File: d.file, Object: d.path, Op: "read", Detail: fmt.Sprintf("rows %d+%d, columns %d+%d outside shape %v", r0, nr, c0, nc, d.Shape)}
	}
	if dst.len() != nr*nc {
		return &Error{File: d.file, Object: d.path, Op: "read", Detail: fmt.Sprintf("buffer of %d values for %dx%d", dst.len(), nr, nc)}
	}
	if nr == 0 || nc == 0 {
		return nil
	}
	p := d.plan()
	if !p.ok {
		switch {
		case dst.f32 != nil:
			return d.ReadSlab32([]int{r0, c0}, []int{nr, nc}, dst.f32)
		case dst.f64 != nil:
			return d.ReadSlab64([]int{r0, c0}, []int{nr, nc}, dst.f64)
		}
		return d.slab(C.H5T_NATIVE_INT32_g, []int{r0, c0}, []int{nr, nc}, dst.i32)
	}
	cr, cc := p.chunk[0], p.chunk[1]
	type job struct{ row, col int }
	var jobs []job
	for r := r0 / cr * cr; r < r0+nr; r += cr {
		for c := c0 / cc * cc; c < c0+nc; c += cc {
			jobs = append(jobs, job{r, c})
		}
	}
	workers := min(runtime.GOMAXPROCS(0), len(jobs))
	errs := make([]error, len(jobs))
	next := make(chan int, len(jobs))
	for i := range jobs {
		next <- i
	}
	close(next)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			dec := C.muarc_decompressor_new()
			defer C.muarc_decompressor_free(dec)
			raw := make([]byte, 0, cr*cc*p.elem)
			plain := make([]byte, cr*cc*p.elem)
			shuf := make([]byte, cr*cc*p.elem)
			for i := range next {
				j := jobs[i]
				if hit := d.cache.get(j.row, j.col); hit != nil {
					copyRect(hit, p, j.row, j.col, r0, nr, c0, nc, dst)
					continue
				}
				var err error
				raw, err = d.chunkPlain(dec, p, j.row, j.col, raw, plain, shuf)
				if err != nil {
					errs[i] = err
					continue
				}
				copyRect(plain, p, j.row, j.col, r0, nr, c0, nc, dst)
				// Keep the chunk only when the read did not use all of it.
				if j.row < r0 || j.row+cr > r0+nr {
					d.cache.put(j.row, j.col, plain)
				}
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// chunkPlain fills plain with the decoded chunk at (row, col).
func (d *Dataset) chunkPlain(dec unsafe.Pointer, p *rectPlan, row, col int, raw, plain, shuf []byte) ([]byte, error) {
	raw, mask, err := d.storedChunk(row, col, raw)
	if errors.Is(err, ErrChunkMissing) {
		clear(plain) // never written: the fill value, 0
		return raw, nil
	}
	if err != nil {
		return raw, err
	}
	if mask != 0 {
		// A filter was skipped for this chunk; let the library decode it.
		return raw, d.libraryChunk(p, row, col, plain)
	}
	if err := d.checkFletcher(raw, row, col); err != nil {
		return raw, err
	}
	body := raw[:len(raw)-4]
	target := plain
	if p.shuffled {
		target = shuf
	}
	if C.muarc_inflate(dec, unsafe.Pointer(&body[0]), C.size_t(len(body)), unsafe.Pointer(&target[0]), C.size_t(len(target))) < 0 {
		return raw, &Error{File: d.file, Object: d.path, Op: fmt.Sprintf("read chunk at row %d column %d", row, col),
			Detail: "deflate stream is damaged or has the wrong length"}
	}
	if p.shuffled {
		unshuffle(plain, shuf, p.elem)
	}
	return raw, nil
}

// libraryChunk decodes one chunk through the library (for chunks stored
// with a filter skipped), writing it into plain in the stored type.
func (d *Dataset) libraryChunk(p *rectPlan, row, col int, plain []byte) error {
	cr, cc := p.chunk[0], p.chunk[1]
	nr, nc := min(cr, d.Shape[0]-row), min(cc, d.Shape[1]-col)
	clear(plain)
	if p.integer {
		tmp := make([]int32, nr*nc)
		if err := d.slab(C.H5T_NATIVE_INT32_g, []int{row, col}, []int{nr, nc}, tmp); err != nil {
			return err
		}
		for r := 0; r < nr; r++ {
			for c := 0; c < nc; c++ {
				v := tmp[r*nc+c]
				i := (r*cc + c) * p.elem
				switch p.elem {
				case 1:
					plain[i] = byte(int8(v))
				case 2:
					binary.LittleEndian.PutUint16(plain[i:], uint16(int16(v)))
				default:
					binary.LittleEndian.PutUint32(plain[i:], uint32(v))
				}
			}
		}
		return nil
	}
	tmp := make([]float64, nr*nc)
	if err := d.ReadSlab64([]int{row, col}, []int{nr, nc}, tmp); err != nil {
		return err
	}
	for r := 0; r < nr; r++ {
		for c := 0; c < nc; c++ {
			v := tmp[r*nc+c]
			i := (r*cc + c) * p.elem
			if p.elem == 4 {
				binary.LittleEndian.PutUint32(plain[i:], math.Float32bits(float32(v)))
			} else {
				binary.LittleEndian.PutUint64(plain[i:], math.Float64bits(v))
			}
		}
	}
	return nil
}

// copyRect copies the overlap of the decoded chunk at (row, col) with the
// requested rectangle into the destination.
func copyRect(plain []byte, p *rectPlan, row, col, r0, nr, c0, nc int, dst rectDst) {
	cc := p.chunk[1]
	ra, rb := max(row, r0), min(row+p.chunk[0], r0+nr)
	ca, cb := max(col, c0), min(col+cc, c0+nc)
	w := cb - ca
	for r := ra; r < rb; r++ {
		src := plain[((r-row)*cc+(ca-col))*p.elem:]
		o := (r-r0)*nc + (ca - c0)
		if p.integer {
			copyInts(src, p.elem, w, dst, o)
			continue
		}
		d32, d64 := dst.f32, dst.f64
		switch {
		case p.elem == 4 && d32 != nil:
			copy(d32[o:o+w], unsafe.Slice((*float32)(unsafe.Pointer(&src[0])), w))
		case p.elem == 4:
			s := unsafe.Slice((*float32)(unsafe.Pointer(&src[0])), w)
			for k, v := range s {
				d64[o+k] = float64(v)
			}
		case d64 != nil:
			copy(d64[o:o+w], unsafe.Slice((*float64)(unsafe.Pointer(&src[0])), w))
		default:
			s := unsafe.Slice((*float64)(unsafe.Pointer(&src[0])), w)
			for k, v := range s {
				d32[o+k] = float32(v)
			}
		}
	}
}

// copyInts widens w little-endian integers of elem bytes from src into
// dst at o (as int32, or converted to float).
func copyInts(src []byte, elem, w int, dst rectDst, o int) {
	for k := 0; k < w; k++ {
		var v int32
		switch elem {
		case 1:
			v = int32(int8(src[k]))
		case 2:
			v = int32(int16(binary.LittleEndian.Uint16(src[2*k:])))
		default:
			v = int32(binary.LittleEndian.Uint32(src[4*k:]))
		}
		switch {
		case dst.i32 != nil:
			dst.i32[o+k] = v
		case dst.f32 != nil:
			dst.f32[o+k] = float32(v)
		default:
			dst.f64[o+k] = float64(v)
		}
	}
}

// chunkCache keeps recently decoded chunks of one dataset so that readers
// stepping through a matrix in blocks shorter than a chunk decode each
// chunk once. It holds at most limit bytes, evicting the oldest first.
type chunkCache struct {
	mu    sync.Mutex
	limit int
	size  int
	keys  [][2]int
	data  map[[2]int][]byte
}

func (c *chunkCache) get(row, col int) []byte {
	if c == nil || c.limit == 0 {
		return nil
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.data[[2]int{row, col}]
}

func (c *chunkCache) put(row, col int, plain []byte) {
	if c == nil || c.limit < len(plain) {
		return
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	k := [2]int{row, col}
	if _, ok := c.data[k]; ok {
		return
	}
	for c.size+len(plain) > c.limit && len(c.keys) > 0 {
		old := c.keys[0]
		c.keys = c.keys[1:]
		c.size -= len(c.data[old])
		delete(c.data, old)
	}
	if c.data == nil {
		c.data = map[[2]int][]byte{}
	}
	c.data[k] = slices.Clone(plain)
	c.keys = append(c.keys, k)
	c.size += len(plain)
}
