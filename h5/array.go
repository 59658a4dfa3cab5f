package h5

/*
#include "shim.h"
*/
import "C"

import (
	"fmt"
	"unsafe"
)

// WriteFloat32Array writes an N-D float32 dataset of the given shape in one
// piece, chunked whole-extent in the first dimension's unit (one chunk per
// leading index) with shuffle, deflate and Fletcher-32.
func (g *Group) WriteFloat32Array(name string, shape []int, data []float32) error {
	n := 1
	for _, s := range shape {
		n *= s
	}
	if n != len(data) || len(shape) == 0 || len(shape) > 32 {
		return &Error{File: g.file, Object: g.child(name), Op: "write array", Detail: fmt.Sprintf("%d values for shape %v", len(data), shape)}
	}
	cname := C.CString(name)
	defer C.free(unsafe.Pointer(cname))
	var dims, chunk [32]C.hsize_t
	for i, s := range shape {
		dims[i] = C.hsize_t(s)
		chunk[i] = C.hsize_t(max(s, 1))
	}
	chunk[0] = 1
	lockLib()
	defer unlockLib()
	id := C.muarc_dset_create(g.id, cname, C.H5T_IEEE_F32LE_g, C.int(len(shape)), &dims[0], &dims[0], &chunk[0], 1, 4, 1)
	if id < 0 {
		return fail(g.file, g.child(name), "create array")
	}
	defer C.H5Dclose(id)
	if n > 0 && C.muarc_dset_write_all(id, C.H5T_NATIVE_FLOAT_g, unsafe.Pointer(&data[0])) < 0 {
		return fail(g.file, g.child(name), "write array")
	}
	return nil
}
