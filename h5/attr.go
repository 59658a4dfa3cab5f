package h5

/*
#include "shim.h"
*/
import "C"

import (
	"fmt"

	"unsafe"
)

// Attr is one attribute as read back: Value is string, float64, int64, bool,
// []float64, []int64, []string or []bool, by the stored type.
type Attr struct {
	Name  string
	Type  string
	Shape []int
	Value any
	// UTF8 is set for string attributes whose type is tagged UTF-8 (HDF5
	// character set H5T_CSET_UTF8); other strings are tagged ASCII.
	UTF8 bool
}

// SetAttr writes (or replaces) an attribute on a group. Accepted values:
// string (variable-length UTF-8), float64, float32, int, int64, int32, bool
// (as h5py writes numpy booleans: an 8-bit enum FALSE=0, TRUE=1),
// []float64 and []int64 (1-D).
func (g *Group) SetAttr(name string, v any) error { return setAttr(&g.obj, name, v) }

// SetAttr writes (or replaces) an attribute on a dataset; see Group.SetAttr.
func (d *Dataset) SetAttr(name string, v any) error { return setAttr(&d.obj, name, v) }

// Attrs reads every attribute of the group, sorted by name.
func (g *Group) Attrs() ([]Attr, error) { return readAttrs(&g.obj) }

// Attrs reads every attribute of the dataset, sorted by name.
func (d *Dataset) Attrs() ([]Attr, error) { return readAttrs(&d.obj) }

// AttrsNamed reads only the named attributes of the group that exist, in
// the order asked (cheaper than Attrs on an object with many).
func (g *Group) AttrsNamed(names ...string) ([]Attr, error) { return readAttrsNamed(&g.obj, names) }

func readAttrsNamed(o *obj, names []string) ([]Attr, error) {
	lockLib()
	defer unlockLib()
	out := make([]Attr, 0, len(names))
	for _, name := range names {
		cname := C.CString(name)
		ok := C.H5Aexists(o.id, cname)
		if ok < 0 {
			C.free(unsafe.Pointer(cname))
			return nil, fail(o.file, o.path, "look for attribute "+name)
		}
		if ok == 0 {
			C.free(unsafe.Pointer(cname))
			continue
		}
		a := C.H5Aopen(o.id, cname, C.H5P_DEFAULT)
		C.free(unsafe.Pointer(cname))
		if a < 0 {
			return nil, fail(o.file, o.path, "open attribute "+name)
		}
		at, err := readAttr(o, a)
		C.H5Aclose(a)
		if err != nil {
			return nil, err
		}
		out = append(out, at)
	}
	return out, nil
}

func setAttr(o *obj, name string, v any) error {
	cname := C.CString(name)
	defer C.free(unsafe.Pointer(cname))
	lockLib()
	defer unlockLib()
	var rc C.int
	switch x := v.(type) {
	case string:
		cs := C.CString(x)
		defer C.free(unsafe.Pointer(cs))
		rc = C.muarc_attr_write_str(o.id, cname, cs)
	case float64:
		rc = C.muarc_attr_write(o.id, cname, C.H5T_NATIVE_DOUBLE_g, C.H5T_IEEE_F64LE_g, 0, 1, unsafe.Pointer(&x))
	case float32:
		y := float64(x)
		rc = C.muarc_attr_write(o.id, cname, C.H5T_NATIVE_DOUBLE_g, C.H5T_IEEE_F64LE_g, 0, 1, unsafe.Pointer(&y))
	case int:
		y := int64(x)
		rc = C.muarc_attr_write(o.id, cname, C.H5T_NATIVE_INT64_g, C.H5T_STD_I64LE_g, 0, 1, unsafe.Pointer(&y))
	case int64:
		rc = C.muarc_attr_write(o.id, cname, C.H5T_NATIVE_INT64_g, C.H5T_STD_I64LE_g, 0, 1, unsafe.Pointer(&x))
	case int32:
		y := int64(x)
		rc = C.muarc_attr_write(o.id, cname, C.H5T_NATIVE_INT64_g, C.H5T_STD_I64LE_g, 0, 1, unsafe.Pointer(&y))
	case bool:
		t := C.muarc_bool_type()
		defer C.H5Tclose(t)
		var b C.int8_t
		if x {
			b = 1
		}
		rc = C.muarc_attr_write(o.id, cname, t, t, 0, 1, unsafe.Pointer(&b))
	case []float64:
		var p unsafe.Pointer
		if len(x) > 0 {
			p = unsafe.Pointer(&x[0])
		}
		rc = C.muarc_attr_write(o.id, cname, C.H5T_NATIVE_DOUBLE_g, C.H5T_IEEE_F64LE_g, 1, C.hsize_t(len(x)), p)
	case []int64:
		var p unsafe.Pointer
		if len(x) > 0 {
			p = unsafe.Pointer(&x[0])
		}
		rc = C.muarc_attr_write(o.id, cname, C.H5T_NATIVE_INT64_g, C.H5T_STD_I64LE_g, 1, C.hsize_t(len(x)), p)
	default:
		return &Error{File: o.file, Object: o.path, Op: "write attribute " + name, Detail: fmt.Sprintf("unsupported value type %T", v)}
	}
	if rc < 0 {
		return fail(o.file, o.path, "write attribute "+name)
	}
	return nil
}

// typeName names an HDF5 type the way muarc reports it.
func typeName(t C.hid_t) string {
	var cls C.int
	var size C.size_t
	var sign, vstr C.int
	if C.muarc_type_info(t, &cls, &size, &sign, &vstr) < 0 {
		return "unknown"
	}
	switch C.H5T_class_t(cls) {
	case C.H5T_FLOAT:
		return fmt.Sprintf("float%d", 8*int(size))
	case C.H5T_INTEGER:
		if sign == C.int(C.H5T_SGN_NONE) {
			return fmt.Sprintf("uint%d", 8*int(size))
		}
		return fmt.Sprintf("int%d", 8*int(size))
	case C.H5T_STRING:
		if vstr != 0 {
			return "string"
		}
		return fmt.Sprintf("string%d", int(size))
	case C.H5T_ENUM:
		if C.muarc_is_bool_enum(t) > 0 {
			return "bool"
		}
		return "enum"
	case C.H5T_COMPOUND:
		return "compound"
	case C.H5T_ARRAY:
		return "array"
	case C.H5T_VLEN:
		return "vlen"
	case C.H5T_REFERENCE:
		return "reference"
	case C.H5T_OPAQUE:
		return "opaque"
	case C.H5T_BITFIELD:
		return "bitfield"
	}
	return "unknown"
}

func spaceShape(space C.hid_t) (shape, maxShape []int, ok bool) {
	var rank C.int
	var dims, maxd [32]C.hsize_t
	if C.muarc_space_info(space, &rank, &dims[0], &maxd[0]) < 0 {
		return nil, nil, false
	}
	shape = make([]int, int(rank))
	maxShape = make([]int, int(rank))
	for i := range shape {
		shape[i] = int(dims[i])
		if maxd[i] == C.H5S_UNLIMITED {
			maxShape[i] = -1
		} else {
			maxShape[i] = int(maxd[i])
		}
	}
	return shape, maxShape, true
}

func readAttrs(o *obj) ([]Attr, error) {
	lockLib()
	defer unlockLib()
	var n C.hsize_t
	if C.muarc_attr_count(o.id, &n) < 0 {
		return nil, fail(o.file, o.path, "count attributes")
	}
	out := make([]Attr, 0, int(n))
	for i := C.hsize_t(0); i < n; i++ {
		a := C.muarc_attr_open_idx(o.id, i)
		if a < 0 {
			return nil, fail(o.file, o.path, fmt.Sprintf("open attribute %d", i))
		}
		at, err := readAttr(o, a)
		C.H5Aclose(a)
		if err != nil {
			return nil, err
		}
		out = append(out, at)
	}
	return out, nil
}

// readAttr reads one open attribute; lib is held.
func readAttr(o *obj, a C.hid_t) (Attr, error) {
	var at Attr
	nlen := C.H5Aget_name(a, 0, nil)
	if nlen < 0 {
		return at, fail(o.file, o.path, "attribute name")
	}
	nb := make([]byte, int(nlen)+1)
	C.H5Aget_name(a, C.size_t(len(nb)), (*C.char)(unsafe.Pointer(&nb[0])))
	at.Name = string(nb[:nlen])
	t := C.H5Aget_type(a)
	sp := C.H5Aget_space(a)
	defer C.H5Tclose(t)
	defer C.H5Sclose(sp)
	at.Type = typeName(t)
	shape, _, ok := spaceShape(sp)
	if !ok {
		return at, fail(o.file, o.path, "attribute "+at.Name+" shape")
	}
	at.Shape = shape
	count := 1
	for _, d := range shape {
		count *= d
	}
	scalar := len(shape) == 0
	opname := "read attribute " + at.Name
	switch {
	case at.Type == "string" || len(at.Type) > 6 && at.Type[:6] == "string":
		at.UTF8 = C.H5Tget_cset(t) == C.H5T_CSET_UTF8
		var strs **C.char
		var m C.hsize_t
		rc := C.muarc_attr_read_strs(a, &strs, &m)
		defer C.muarc_free_strs(strs, m)
		if rc < 0 {
			return at, fail(o.file, o.path, opname)
		}
		ss := unsafe.Slice(strs, int(m))
		vals := make([]string, int(m))
		for i := range vals {
			vals[i] = trimNul(C.GoString(ss[i]))
		}
		if scalar && len(vals) == 1 {
			at.Value = vals[0]
		} else {
			at.Value = vals
		}
	case at.Type == "bool":
		vals := make([]int8, max(count, 1))
		if C.muarc_attr_read(a, t, unsafe.Pointer(&vals[0])) < 0 {
			return at, fail(o.file, o.path, opname)
		}
		bs := make([]bool, count)
		for i := range bs {
			bs[i] = vals[i] != 0
		}
		at.Value = scalarOrSlice(bs, count, scalar)
	case len(at.Type) > 3 && (at.Type[:3] == "int" || at.Type[:4] == "uint"):
		vals := make([]int64, max(count, 1))
		if C.muarc_attr_read(a, C.H5T_NATIVE_INT64_g, unsafe.Pointer(&vals[0])) < 0 {
			return at, fail(o.file, o.path, opname)
		}
		at.Value = scalarOrSlice(vals, count, scalar)
	case len(at.Type) > 5 && at.Type[:5] == "float":
		vals := make([]float64, max(count, 1))
		if C.muarc_attr_read(a, C.H5T_NATIVE_DOUBLE_g, unsafe.Pointer(&vals[0])) < 0 {
			return at, fail(o.file, o.path, opname)
		}
		at.Value = scalarOrSlice(vals, count, scalar)
	default:
		at.Value = nil // a type muarc does not write; reported by Type
	}
	return at, nil
}

func trimNul(s string) string {
	for len(s) > 0 && s[len(s)-1] == 0 {
		s = s[:len(s)-1]
	}
	return s
}

// AttrMap indexes attributes by name.
func AttrMap(as []Attr) map[string]Attr {
	m := make(map[string]Attr, len(as))
	for _, a := range as {
		m[a.Name] = a
	}
	return m
}

// scalarOrSlice is an attribute's value: its one element when the
// attribute is scalar, else its count elements.
func scalarOrSlice[T any](vals []T, count int, scalar bool) any {
	if scalar {
		return vals[0]
	}
	return vals[:count]
}
