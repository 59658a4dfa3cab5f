package h5

/*
#include "shim.h"
*/
import "C"

import (
	"fmt"
	"sync"
	"unsafe"
)

// Dataset is an open HDF5 dataset.
type Dataset struct {
	obj
	// Type is the stored element type ("float32", "int64", "string", ...).
	Type string
	// Shape and MaxShape are the extent (-1 in MaxShape = unlimited).
	Shape, MaxShape []int
	// UTF8 is set for a string dataset whose type is tagged UTF-8.
	UTF8 bool
	// ieeeLE is set when the stored type is exactly IEEE 754 binary32 or
	// binary64, little-endian, or a signed 8-, 16- or 32-bit little-endian
	// integer: the only forms whose raw chunk bytes the fast read path may
	// decode itself. Another byte order (a file rewritten by another tool
	// or on another machine) goes through the library, which converts it.
	ieeeLE bool

	planOnce sync.Once
	rect     *rectPlan
	cache    *chunkCache
}

// columnChunk is the chunk length of 1-D numeric columns (elements).
const columnChunk = 1 << 16

// OpenDataset opens a child dataset. cacheBytes > 0 sets the size of its
// chunk caches (the library's and ReadRect's, bytes each), so block-wise
// readers do not inflate a chunk twice.
func (g *Group) OpenDataset(name string, cacheBytes int) (*Dataset, error) {
	cname := C.CString(name)
	defer C.free(unsafe.Pointer(cname))
	lockLib()
	defer unlockLib()
	dapl := C.H5Pcreate(C.H5P_CLS_DATASET_ACCESS_ID_g)
	if cacheBytes > 0 {
		C.H5Pset_chunk_cache(dapl, 12421, C.size_t(cacheBytes), 1.0)
	}
	id := C.H5Dopen2(g.id, cname, dapl)
	C.H5Pclose(dapl)
	if id < 0 {
		return nil, fail(g.file, g.child(name), "open dataset")
	}
	d := &Dataset{obj: obj{id: id, file: g.file, path: g.child(name)}, cache: &chunkCache{limit: cacheBytes}}
	t := C.H5Dget_type(id)
	d.Type = typeName(t)
	d.ieeeLE = C.H5Tequal(t, C.H5T_IEEE_F32LE_g) > 0 || C.H5Tequal(t, C.H5T_IEEE_F64LE_g) > 0 ||
		C.H5Tequal(t, C.H5T_STD_I8LE_g) > 0 || C.H5Tequal(t, C.H5T_STD_I16LE_g) > 0 || C.H5Tequal(t, C.H5T_STD_I32LE_g) > 0
	if C.H5Tget_class(t) == C.H5T_STRING {
		d.UTF8 = C.H5Tget_cset(t) == C.H5T_CSET_UTF8
	}
	C.H5Tclose(t)
	sp := C.H5Dget_space(id)
	shape, maxShape, ok := spaceShape(sp)
	C.H5Sclose(sp)
	if !ok {
		C.H5Dclose(id)
		return nil, fail(g.file, d.path, "dataset shape")
	}
	d.Shape, d.MaxShape = shape, maxShape
	return d, nil
}

// Close releases the dataset handle.
func (d *Dataset) Close() error {
	lockLib()
	defer unlockLib()
	if C.H5Dclose(d.id) < 0 {
		return fail(d.file, d.path, "close dataset")
	}
	return nil
}

// Len is the number of elements along the first dimension.
func (d *Dataset) Len() int {
	if len(d.Shape) == 0 {
		return 1
	}
	return d.Shape[0]
}

// firstElem points at a slice's first element, nil when it is empty.
func firstElem[T any](x []T) unsafe.Pointer {
	if len(x) == 0 {
		return nil
	}
	return unsafe.Pointer(&x[0])
}

// numeric maps a Go slice to HDF5 memory and file types and a data pointer.
func numeric(v any) (mem, file C.hid_t, n int, p unsafe.Pointer, ok bool) {
	switch x := v.(type) {
	case []float64:
		mem, file, n, p = C.H5T_NATIVE_DOUBLE_g, C.H5T_IEEE_F64LE_g, len(x), firstElem(x)
	case []float32:
		mem, file, n, p = C.H5T_NATIVE_FLOAT_g, C.H5T_IEEE_F32LE_g, len(x), firstElem(x)
	case []int64:
		mem, file, n, p = C.H5T_NATIVE_INT64_g, C.H5T_STD_I64LE_g, len(x), firstElem(x)
	case []int32:
		mem, file, n, p = C.H5T_NATIVE_INT32_g, C.H5T_STD_I32LE_g, len(x), firstElem(x)
	case []uint8:
		mem, file, n, p = C.H5T_NATIVE_UINT8_g, C.H5T_STD_U8LE_g, len(x), firstElem(x)
	default:
		return 0, 0, 0, nil, false
	}
	return mem, file, n, p, true
}

// WriteColumn writes a 1-D dataset. Numeric slices ([]float64, []float32,
// []int64, []int32, []uint8) are stored chunked with shuffle, deflate and
// Fletcher-32 so every column is covered by checksums; []bool as h5py
// booleans (same filters); []string as variable-length UTF-8 (HDF5 cannot
// checksum those).
func (g *Group) WriteColumn(name string, v any) error {
	cname := C.CString(name)
	defer C.free(unsafe.Pointer(cname))
	if s, ok := v.([]string); ok {
		cs := make([]*C.char, len(s))
		for i := range s {
			cs[i] = C.CString(s[i])
		}
		defer func() {
			for _, c := range cs {
				C.free(unsafe.Pointer(c))
			}
		}()
		// The C strings live in C memory, so the array of pointers must too.
		arr := (**C.char)(C.calloc(C.size_t(max(len(cs), 1)), C.size_t(unsafe.Sizeof(uintptr(0)))))
		defer C.free(unsafe.Pointer(arr))
		copy(unsafe.Slice(arr, len(cs)), cs)
		lockLib()
		defer unlockLib()
		if C.muarc_dset_write_strs(g.id, cname, arr, C.hsize_t(len(s))) < 0 {
			return fail(g.file, g.child(name), "write column")
		}
		return nil
	}
	var boolType C.hid_t = -1
	if b, ok := v.([]bool); ok {
		u := make([]uint8, len(b))
		for i, x := range b {
			if x {
				u[i] = 1
			}
		}
		v = u
		lockLib()
		boolType = C.muarc_bool_type()
		unlockLib()
	}
	mem, file, n, p, ok := numeric(v)
	if !ok {
		return &Error{File: g.file, Object: g.child(name), Op: "write column", Detail: fmt.Sprintf("unsupported column type %T", v)}
	}
	lockLib()
	defer unlockLib()
	if boolType >= 0 {
		mem, file = boolType, boolType
		defer C.H5Tclose(boolType)
	}
	dims := [1]C.hsize_t{C.hsize_t(n)}
	maxd := [1]C.hsize_t{C.H5S_UNLIMITED}
	chunk := [1]C.hsize_t{C.hsize_t(min(max(n, 1), columnChunk))}
	id := C.muarc_dset_create(g.id, cname, file, 1, &dims[0], &maxd[0], &chunk[0], 1, 4, 1)
	if id < 0 {
		return fail(g.file, g.child(name), "create column")
	}
	defer C.H5Dclose(id)
	if n > 0 && C.muarc_dset_write_all(id, mem, p) < 0 {
		return fail(g.file, g.child(name), "write column")
	}
	return nil
}

// Float64s reads a numeric dataset whole, converted to float64.
func (d *Dataset) Float64s() ([]float64, error) {
	out := make([]float64, d.count())
	return out, d.readAll(C.H5T_NATIVE_DOUBLE_g, out)
}

// Float32s reads a numeric dataset whole, converted to float32.
func (d *Dataset) Float32s() ([]float32, error) {
	out := make([]float32, d.count())
	return out, d.readAll(C.H5T_NATIVE_FLOAT_g, out)
}

// Int64s reads an integer dataset whole.
func (d *Dataset) Int64s() ([]int64, error) {
	if d.Type == "bool" {
		b, err := d.Bools()
		out := make([]int64, len(b))
		for i, x := range b {
			if x {
				out[i] = 1
			}
		}
		return out, err
	}
	if len(d.Type) < 3 || (d.Type[:3] != "int" && d.Type[:4] != "uint") {
		return nil, &Error{File: d.file, Object: d.path, Op: "read", Detail: "stored as " + d.Type + ", expected an integer type"}
	}
	out := make([]int64, d.count())
	return out, d.readAll(C.H5T_NATIVE_INT64_g, out)
}

// Bools reads a boolean (h5py enum) or integer 0/1 dataset whole.
func (d *Dataset) Bools() ([]bool, error) {
	n := d.count()
	raw := make([]int8, n)
	lockLib()
	t := C.H5Dget_type(d.id)
	var err error
	if n > 0 {
		var mem C.hid_t = C.H5T_NATIVE_INT8_g
		if d.Type == "bool" {
			mem = t
		}
		if C.H5Dread(d.id, mem, C.H5S_ALL, C.H5S_ALL, C.H5P_DEFAULT, unsafe.Pointer(&raw[0])) < 0 {
			err = fail(d.file, d.path, "read")
		}
	}
	C.H5Tclose(t)
	C.H5Eclear2(C.H5E_DEFAULT)
	unlockLib()
	out := make([]bool, n)
	for i, x := range raw {
		out[i] = x != 0
	}
	return out, err
}

// Strings reads a string dataset whole (variable or fixed length).
func (d *Dataset) Strings() ([]string, error) {
	lockLib()
	defer unlockLib()
	var strs **C.char
	var m C.hsize_t
	rc := C.muarc_dset_read_strs(d.id, &strs, &m)
	defer C.muarc_free_strs(strs, m)
	if rc < 0 {
		return nil, fail(d.file, d.path, "read strings")
	}
	ss := unsafe.Slice(strs, int(m))
	out := make([]string, int(m))
	for i := range out {
		out[i] = trimNul(C.GoString(ss[i]))
	}
	return out, nil
}

func (d *Dataset) count() int {
	n := 1
	for _, s := range d.Shape {
		n *= s
	}
	return n
}

func (d *Dataset) readAll(mem C.hid_t, out any) error {
	_, _, n, p, _ := numeric(out)
	if n == 0 {
		return nil
	}
	lockLib()
	defer unlockLib()
	if C.H5Dread(d.id, mem, C.H5S_ALL, C.H5S_ALL, C.H5P_DEFAULT, p) < 0 {
		return fail(d.file, d.path, "read")
	}
	return nil
}

// ReadSlab32 reads the hyperslab start..start+count of a numeric dataset into
// dst (row-major, len = product of count), converting to float32.
func (d *Dataset) ReadSlab32(start, count []int, dst []float32) error {
	return d.slab(C.H5T_NATIVE_FLOAT_g, start, count, dst)
}

// ReadSlab64 is ReadSlab32 for float64.
func (d *Dataset) ReadSlab64(start, count []int, dst []float64) error {
	return d.slab(C.H5T_NATIVE_DOUBLE_g, start, count, dst)
}

func (d *Dataset) slab(mem C.hid_t, start, count []int, dst any) error {
	if len(start) != len(d.Shape) || len(count) != len(d.Shape) {
		return &Error{File: d.file, Object: d.path, Op: "read", Detail: fmt.Sprintf("selection of rank %d on a dataset of rank %d", len(start), len(d.Shape))}
	}
	total := 1
	var st, ct [32]C.hsize_t
	for i := range start {
		if start[i] < 0 || count[i] < 0 || start[i]+count[i] > d.Shape[i] {
			return &Error{File: d.file, Object: d.path, Op: "read", Detail: fmt.Sprintf("selection %v+%v outside shape %v", start, count, d.Shape)}
		}
		st[i], ct[i] = C.hsize_t(start[i]), C.hsize_t(count[i])
		total *= count[i]
	}
	_, _, n, p, _ := numeric(dst)
	if n != total {
		return &Error{File: d.file, Object: d.path, Op: "read", Detail: fmt.Sprintf("buffer of %d values for a selection of %d", n, total)}
	}
	if total == 0 {
		return nil
	}
	lockLib()
	defer unlockLib()
	if C.muarc_dset_rw_slab(d.id, mem, C.int(len(start)), &st[0], &ct[0], p, 0) < 0 {
		return fail(d.file, d.path, "read")
	}
	return nil
}
