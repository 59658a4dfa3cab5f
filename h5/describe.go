package h5

/*
#include "shim.h"
*/
import "C"

import (
	"encoding/binary"
	"errors"
	"fmt"
	"sort"
	"strings"
	"unsafe"
)

// Object describes one group or dataset of a file, as Describe finds it.
type Object struct {
	Path      string
	IsDataset bool
	// Type, Shape and MaxShape are set for datasets (-1 = unlimited).
	Type            string
	Shape, MaxShape []int
	// Chunk is the chunk shape; nil for contiguous or compact datasets.
	Chunk []int
	// Filters lists the pipeline in order: "shuffle", "deflate",
	// "fletcher32", or "filter-<id>" for others.
	Filters []string
	Attrs   []Attr
}

// Describe lists every group and dataset in the file, depth first, members
// in creation order.
func Describe(name string) ([]Object, error) {
	f, err := Open(name)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return f.Describe()
}

// Describe lists every group and dataset of the open file, depth first,
// members in creation order.
func (f *File) Describe() ([]Object, error) {
	root, err := f.Root()
	if err != nil {
		return nil, err
	}
	defer root.Close()
	var out []Object
	err = walk(root, func(g *Group) error {
		attrs, err := g.Attrs()
		out = append(out, Object{Path: g.path, Attrs: attrs})
		return err
	}, func(d *Dataset) error {
		o, err := describeDataset(d)
		out = append(out, o)
		return err
	}, func(path string) {
		out = append(out, Object{Path: path, Type: "link"})
	})
	return out, err
}

// walk visits g and everything below it, depth first, members in creation
// order: onGroup for each group (g first), onDataset for each dataset, and
// onOther, when set, for links that are neither. Callbacks must not keep
// the objects, which are closed after them.
func walk(g *Group, onGroup func(*Group) error, onDataset func(*Dataset) error, onOther func(path string)) error {
	if onGroup != nil {
		if err := onGroup(g); err != nil {
			return err
		}
	}
	kids, err := g.Children()
	if err != nil {
		return err
	}
	for _, k := range kids {
		switch k.Kind {
		case KindGroup:
			sub, err := g.OpenGroup(k.Name)
			if err != nil {
				return err
			}
			err = walk(sub, onGroup, onDataset, onOther)
			sub.Close()
			if err != nil {
				return err
			}
		case KindDataset:
			d, err := g.OpenDataset(k.Name, 0)
			if err != nil {
				return err
			}
			err = onDataset(d)
			d.Close()
			if err != nil {
				return err
			}
		default:
			if onOther != nil {
				onOther(g.child(k.Name))
			}
		}
	}
	return nil
}

func describeDataset(d *Dataset) (Object, error) {
	o := Object{Path: d.path, IsDataset: true, Type: d.Type, Shape: d.Shape, MaxShape: d.MaxShape}
	chunk, filters, err := d.Layout()
	if err != nil {
		return o, err
	}
	o.Chunk, o.Filters = chunk, filters
	o.Attrs, err = d.Attrs()
	return o, err
}

// Layout returns the dataset's chunk shape (nil when not chunked) and filter
// pipeline.
func (d *Dataset) Layout() (chunk []int, filters []string, err error) {
	lockLib()
	defer unlockLib()
	var chunked, rank, nf C.int
	var cd [32]C.hsize_t
	var fl [16]C.int
	if C.muarc_dset_layout(d.id, &chunked, &rank, &cd[0], &nf, &fl[0]) < 0 {
		return nil, nil, fail(d.file, d.path, "read layout")
	}
	if chunked == 0 {
		return nil, nil, nil
	}
	for i := 0; i < int(rank); i++ {
		chunk = append(chunk, int(cd[i]))
	}
	for i := 0; i < int(nf); i++ {
		filters = append(filters, filterName(int(fl[i])))
	}
	return chunk, filters, nil
}

func filterName(id int) string {
	switch id {
	case int(C.H5Z_FILTER_DEFLATE):
		return "deflate"
	case int(C.H5Z_FILTER_SHUFFLE):
		return "shuffle"
	case int(C.H5Z_FILTER_FLETCHER32):
		return "fletcher32"
	case int(C.H5Z_FILTER_SZIP):
		return "szip"
	case int(C.H5Z_FILTER_NBIT):
		return "nbit"
	case int(C.H5Z_FILTER_SCALEOFFSET):
		return "scaleoffset"
	}
	return fmt.Sprintf("filter-%d", id)
}

// ChunkFault is one stored chunk that failed its checksum or could not be
// read. Offset is the chunk's first element (row, column, ...).
type ChunkFault struct {
	Dataset string
	Offset  []int
	Err     error
}

// VerifyChunks reads every stored chunk of every dataset that has a
// Fletcher-32 filter, raw (without decoding), and checks its checksum. It
// calls fn for each faulty chunk and returns the number of chunks checked.
// Reading raw chunks also finds faults in chunks a partial read would skip.
// It reads no attributes and no string data, so damage to the unchecksummed
// global heap (where variable-length strings live) cannot stop it.
func VerifyChunks(name string, fn func(ChunkFault)) (int, error) {
	f, err := Open(name)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	return f.VerifyChunks(fn)
}

// VerifyChunks is the package-level VerifyChunks on an open file.
func (f *File) VerifyChunks(fn func(ChunkFault)) (int, error) {
	root, err := f.Root()
	if err != nil {
		return 0, err
	}
	defer root.Close()
	checked := 0
	err = walk(root, nil, func(d *Dataset) error {
		chunk, filters, err := d.Layout()
		if err != nil {
			fn(ChunkFault{Dataset: d.path, Err: err})
			return nil
		}
		if !hasFilter(filters, "fletcher32") {
			return nil
		}
		n, err := d.verify(chunk, true, fn)
		checked += n
		if err != nil {
			fn(ChunkFault{Dataset: d.path, Err: err})
		}
		return nil
	}, nil)
	return checked, err
}

// VerifyChunksOf is VerifyChunks for a file already described (objs from
// Describe or Survey of f): it opens only the datasets whose filters
// include Fletcher-32, in the order of objs, instead of walking the file
// again.
func (f *File) VerifyChunksOf(objs []Object, fn func(ChunkFault)) (int, error) {
	return f.VerifyChunksIndexOnly(objs, nil, fn)
}

// VerifyChunksIndexOnly is VerifyChunksOf checking only the chunk index
// (every chunk of the extent listed, on the grid) of the datasets whose
// paths indexOnly holds: a caller that is about to read every chunk of
// them with its Fletcher-32 check (a decoding read, or
// MatrixWriter.CopyChunksFrom) need not read them twice. The count
// returned covers the chunks whose bytes were checked.
func (f *File) VerifyChunksIndexOnly(objs []Object, indexOnly map[string]bool, fn func(ChunkFault)) (int, error) {
	root, err := f.Root()
	if err != nil {
		return 0, err
	}
	defer root.Close()
	checked := 0
	for _, o := range objs {
		if !o.IsDataset || !hasFilter(o.Filters, "fletcher32") {
			continue
		}
		d, err := root.OpenDataset(strings.TrimPrefix(o.Path, "/"), 0)
		if err != nil {
			fn(ChunkFault{Dataset: o.Path, Err: err})
			continue
		}
		n, err := d.verify(o.Chunk, !indexOnly[o.Path], fn)
		d.Close()
		checked += n
		if err != nil {
			fn(ChunkFault{Dataset: o.Path, Err: err})
		}
	}
	return checked, nil
}

func hasFilter(fs []string, name string) bool {
	for _, f := range fs {
		if f == name {
			return true
		}
	}
	return false
}

// ChunkInfo is where one stored chunk is: its first element and its size
// in bytes as stored (after filters).
type ChunkInfo struct {
	Offset []int
	Bytes  int
	// Addr is the chunk's byte address in the file.
	Addr int64
	// Mask has a bit set for each filter skipped when the chunk was
	// stored (0: the whole pipeline).
	Mask uint
}

// Chunks lists the dataset's stored chunks in file order.
func (d *Dataset) Chunks() ([]ChunkInfo, error) {
	lockLib()
	defer unlockLib()
	var n C.hsize_t
	if C.muarc_chunk_count(d.id, &n) < 0 {
		return nil, fail(d.file, d.path, "count chunks")
	}
	out := make([]ChunkInfo, 0, int(n))
	addrs := make([]uint64, 0, int(n))
	for i := C.hsize_t(0); i < n; i++ {
		var off [32]C.hsize_t
		var mask C.uint
		var addr C.haddr_t
		var size C.hsize_t
		if C.muarc_chunk_info(d.id, i, &off[0], &mask, &addr, &size) < 0 {
			return nil, fail(d.file, d.path, fmt.Sprintf("chunk %d info", i))
		}
		ci := ChunkInfo{Bytes: int(size), Addr: int64(addr), Mask: uint(mask)}
		for k := range d.Shape {
			ci.Offset = append(ci.Offset, int(off[k]))
		}
		out = append(out, ci)
		addrs = append(addrs, uint64(addr))
	}
	idx := make([]int, len(out))
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return addrs[idx[a]] < addrs[idx[b]] })
	sorted := make([]ChunkInfo, len(out))
	for i, k := range idx {
		sorted[i] = out[k]
	}
	return sorted, nil
}

// ReadRawChunk returns the stored bytes of the chunk starting at offset.
func (d *Dataset) ReadRawChunk(offset []int, size int, buf []byte) ([]byte, error) {
	if cap(buf) < size {
		buf = make([]byte, size)
	}
	buf = buf[:size]
	var off [32]C.hsize_t
	for i, o := range offset {
		off[i] = C.hsize_t(o)
	}
	var mask C.uint
	lockLib()
	defer unlockLib()
	var p unsafe.Pointer
	if size > 0 {
		p = unsafe.Pointer(&buf[0])
	}
	if C.muarc_chunk_read(d.id, &off[0], &mask, p) < 0 {
		return nil, fail(d.file, d.path, fmt.Sprintf("read chunk at %v", offset))
	}
	return buf, nil
}

// ErrChunkMissing marks a chunk that the dataset's extent needs but its
// chunk index (a B-tree in HDF5 1.10 files) does not list: HDF5 would read
// it as fill values (zeros) without an error.
var ErrChunkMissing = errors.New("chunk missing from the chunk index")

// verify checks the chunk index of d against its extent and, when bytes,
// every stored chunk's Fletcher-32.
func (d *Dataset) verify(chunk []int, bytes bool, fn func(ChunkFault)) (int, error) {
	chunks, err := d.Chunks()
	if err != nil {
		return 0, err
	}
	d.checkChunkGrid(chunk, chunks, fn)
	if !bytes {
		return 0, nil
	}
	var buf []byte
	for _, c := range chunks {
		buf, err = d.ReadRawChunk(c.Offset, c.Bytes, buf)
		if err != nil {
			fn(ChunkFault{Dataset: d.path, Offset: c.Offset, Err: err})
			continue
		}
		if len(buf) < 4 {
			fn(ChunkFault{Dataset: d.path, Offset: c.Offset, Err: fmt.Errorf("chunk of %d bytes has no room for its checksum: %w", len(buf), ErrChecksum)})
			continue
		}
		body := buf[:len(buf)-4]
		want := binary.LittleEndian.Uint32(buf[len(buf)-4:])
		if fletcher32(body) != want {
			fn(ChunkFault{Dataset: d.path, Offset: c.Offset, Err: fmt.Errorf("Fletcher-32 %08x stored, %08x computed: %w", want, fletcher32(body), ErrChecksum)})
		}
	}
	return len(chunks), nil
}

// checkChunkGrid reports every chunk the extent needs that the index does
// not list (written datasets have all their chunks; muarc writes every one)
// and every listed chunk that is not on the chunk grid inside the extent.
func (d *Dataset) checkChunkGrid(chunk []int, chunks []ChunkInfo, fn func(ChunkFault)) {
	if len(chunk) != len(d.Shape) || len(chunk) == 0 {
		return
	}
	key := func(off []int) string { return fmt.Sprint(off) }
	have := make(map[string]bool, len(chunks))
	for _, c := range chunks {
		ok := len(c.Offset) == len(chunk)
		for i := 0; ok && i < len(chunk); i++ {
			ok = chunk[i] > 0 && c.Offset[i]%chunk[i] == 0 && c.Offset[i] < d.Shape[i]
		}
		if !ok {
			fn(ChunkFault{Dataset: d.path, Offset: c.Offset, Err: fmt.Errorf("a chunk listed at an offset off the chunk grid or outside the extent %v: %w", d.Shape, ErrChunkMissing)})
			continue
		}
		have[key(c.Offset)] = true
	}
	total := 1
	for i := range chunk {
		if chunk[i] <= 0 {
			return
		}
		total *= (d.Shape[i] + chunk[i] - 1) / chunk[i]
	}
	if total == len(have) || total > 1<<24 {
		return
	}
	off := make([]int, len(chunk))
	missing := 0
	for n := 0; n < total; n++ {
		if !have[key(off)] {
			missing++
			if missing <= 20 {
				fn(ChunkFault{Dataset: d.path, Offset: append([]int(nil), off...), Err: fmt.Errorf("%w: it would read as zeros", ErrChunkMissing)})
			}
		}
		for i := len(off) - 1; i >= 0; i-- {
			off[i] += chunk[i]
			if off[i] < d.Shape[i] {
				break
			}
			off[i] = 0
		}
	}
	if missing > 20 {
		fn(ChunkFault{Dataset: d.path, Err: fmt.Errorf("%d more chunks: %w", missing-20, ErrChunkMissing)})
	}
}
