// Package h5 is muarc's one door to the HDF5 library: files, creation-ordered
// groups, typed attributes (UTF-8 strings, numbers, booleans as h5py writes
// them), 1-D column datasets, filtered chunked matrices written by parallel
// direct chunk writes, and whole-file introspection and checksum scans.
//
// No other muarc package imports the HDF5 binding. The Debian HDF5 build is
// not thread-safe, so every call into the library holds one package lock;
// compression and checksums run outside it, in parallel.
package h5

/*
#cgo pkg-config: hdf5
#cgo LDFLAGS: -ldeflate
#include "shim.h"
*/
import "C"

import (
	"errors"
	"runtime"

	"path"
	"strings"
	"sync"
	"unsafe"

	"gonum.org/v1/hdf5"
)

// lib serialises every call into the HDF5 library.
var lib sync.Mutex

// lockLib takes the library lock on a fixed OS thread. Debian's HDF5 keeps
// its error stack, and the setting that prints it to stderr, per thread;
// pinning the goroutine keeps the stack we read the one the failing call
// wrote, and each thread is told once not to print (muarc turns the stack
// into Go errors instead).
func lockLib() {
	runtime.LockOSThread()
	lib.Lock()
	C.muarc_quiet()
}

func unlockLib() {
	lib.Unlock()
	runtime.UnlockOSThread()
}

// ErrChecksum marks a read that failed because stored bytes no longer match
// their Fletcher-32 checksum (bit rot or tampering).
var ErrChecksum = errors.New("checksum mismatch")

// Error is a failed HDF5 operation: the file, the object path inside it, what
// was being done and the library's own explanation.
type Error struct {
	File     string
	Object   string
	Op       string
	Detail   string
	sentinel error
}

func (e *Error) Error() string {
	s := e.File
	if e.Object != "" {
		s += ": " + e.Object
	}
	s += ": " + e.Op
	if e.Detail != "" {
		s += ": " + e.Detail
	}
	return s
}

// Unwrap lets errors.Is find ErrChecksum.
func (e *Error) Unwrap() error { return e.sentinel }

// fail builds an Error from the library's error stack; call it with lib held.
func fail(file, object, op string) error {
	var buf [1024]C.char
	C.muarc_error_text(&buf[0], C.size_t(len(buf)))
	e := &Error{File: file, Object: object, Op: op, Detail: C.GoString(&buf[0])}
	if strings.Contains(strings.ToLower(e.Detail), "fletcher32") || strings.Contains(e.Detail, "checksum") {
		e.sentinel = ErrChecksum
	}
	return e
}

// File is an open HDF5 file.
type File struct {
	f    *hdf5.File
	name string
}

// Create creates (truncates) an HDF5 file for writing.
func Create(name string) (*File, error) {
	lockLib()
	defer unlockLib()
	f, err := hdf5.CreateFile(name, hdf5.F_ACC_TRUNC)
	if err != nil {
		return nil, fail(name, "", "create")
	}
	return &File{f: f, name: name}, nil
}

// Open opens an existing HDF5 file read-only.
func Open(name string) (*File, error) {
	lockLib()
	defer unlockLib()
	if !hdf5.IsHDF5(name) {
		C.H5Eclear2(C.H5E_DEFAULT)
		return nil, &Error{File: name, Op: "open", Detail: "not an HDF5 file (no HDF5 signature found)"}
	}
	f, err := hdf5.OpenFile(name, hdf5.F_ACC_RDONLY)
	if err != nil {
		return nil, fail(name, "", "open")
	}
	return &File{f: f, name: name}, nil
}

// Name is the file's path as given to Create or Open.
func (f *File) Name() string { return f.name }

// Close closes the file; objects opened from it must be closed first.
func (f *File) Close() error {
	lockLib()
	defer unlockLib()
	if err := f.f.Close(); err != nil {
		return fail(f.name, "", "close")
	}
	return nil
}

// Root opens the root group "/".
func (f *File) Root() (*Group, error) {
	lockLib()
	defer unlockLib()
	g, err := f.f.OpenGroup("/")
	if err != nil {
		return nil, fail(f.name, "/", "open group")
	}
	return &Group{obj{id: C.hid_t(g.ID()), file: f.name, path: "/"}, g}, nil
}

// obj is what groups and datasets share: a handle, the file and a path.
type obj struct {
	id   C.hid_t
	file string
	path string
}

// Path is the object's absolute path in the file.
func (o *obj) Path() string { return o.path }

func (o *obj) child(name string) string { return path.Join(o.path, name) }

// Group is an open HDF5 group.
type Group struct {
	obj
	g *hdf5.Group
}

// Close releases the group handle.
func (g *Group) Close() error {
	lockLib()
	defer unlockLib()
	if err := g.g.Close(); err != nil {
		return fail(g.file, g.path, "close group")
	}
	return nil
}

// CreateGroup creates a child group that remembers the creation order of its
// members, so readers list them in the order they were written.
func (g *Group) CreateGroup(name string) (*Group, error) {
	cname := C.CString(name)
	defer C.free(unsafe.Pointer(cname))
	lockLib()
	defer unlockLib()
	id := C.muarc_group_create(g.id, cname)
	if id < 0 {
		return nil, fail(g.file, g.child(name), "create group")
	}
	C.H5Gclose(id)
	sub, err := g.g.OpenGroup(name)
	if err != nil {
		return nil, fail(g.file, g.child(name), "open group")
	}
	return &Group{obj{id: C.hid_t(sub.ID()), file: g.file, path: g.child(name)}, sub}, nil
}

// OpenGroup opens a child group.
func (g *Group) OpenGroup(name string) (*Group, error) {
	lockLib()
	defer unlockLib()
	sub, err := g.g.OpenGroup(name)
	if err != nil {
		return nil, fail(g.file, g.child(name), "open group")
	}
	return &Group{obj{id: C.hid_t(sub.ID()), file: g.file, path: g.child(name)}, sub}, nil
}

// Has reports whether the group has a link called name.
func (g *Group) Has(name string) bool {
	lockLib()
	defer unlockLib()
	ok := g.g.LinkExists(name)
	C.H5Eclear2(C.H5E_DEFAULT)
	return ok
}

// Kind of a group member.
type Kind int

// Member kinds.
const (
	KindGroup Kind = iota
	KindDataset
	KindOther
)

// Child is one member of a group.
type Child struct {
	Name string
	Kind Kind
}

// Children lists the group's members in creation order when the group tracks
// it (muarc's groups do), else by name.
func (g *Group) Children() ([]Child, error) {
	lockLib()
	defer unlockLib()
	var names **C.char
	var kinds *C.int
	var n C.hsize_t
	rc := C.muarc_group_children(g.id, &names, &kinds, &n)
	defer func() {
		C.muarc_free_strs(names, n)
		C.free(unsafe.Pointer(kinds))
	}()
	if rc < 0 {
		return nil, fail(g.file, g.path, "list members")
	}
	ns := unsafe.Slice(names, int(n))
	ks := unsafe.Slice(kinds, int(n))
	out := make([]Child, int(n))
	for i := range out {
		out[i] = Child{C.GoString(ns[i]), Kind(ks[i])}
	}
	return out, nil
}
