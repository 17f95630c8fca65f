// Package h5 is trajvault's HDF5 layer: a thin, leak-free wrapper over
// gonum.org/v1/hdf5 plus the small C shim in shim.c for what that binding
// lacks (link and attribute iteration, string attributes of both kinds,
// chunked extendible datasets with stock filters, filter inspection and
// object identity).
//
// The serial HDF5 library is not thread-safe. Every exported function and
// method takes the package mutex, so callers may use the package from any
// goroutine; HDF5 work is serialised here and nowhere else.
//
// No C type escapes this package. Paths are absolute HDF5 paths such as
// "/particles/all/position/value".
package h5

// #cgo LDFLAGS: -lhdf5 -lhdf5_hl
// #cgo linux,!arm64 CFLAGS: -I/usr/lib/x86_64-linux-gnu/hdf5/serial/include
// #cgo linux,!arm64 LDFLAGS: -L/usr/lib/x86_64-linux-gnu/hdf5/serial/
// #cgo linux,arm64 CFLAGS: -I/usr/lib/aarch64-linux-gnu/hdf5/serial/include
// #cgo linux,arm64 LDFLAGS: -L/usr/lib/aarch64-linux-gnu/hdf5/serial/
// #include "shim.h"
import "C"

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"sync"
	"unsafe"

	"gonum.org/v1/hdf5"
)

// mu guards every call into the HDF5 C library.
var mu sync.Mutex

// lock takes the library mutex and pins the goroutine to its OS thread, so
// that the per-thread error-printing switch set here applies to the calls
// that follow.
func lock() {
	mu.Lock()
	runtime.LockOSThread()
	C.tv_quiet()
}

func unlock() {
	runtime.UnlockOSThread()
	mu.Unlock()
}

func init() {
	mu.Lock()
	C.tv_init()
	mu.Unlock()
}

// Errors returned by Open for files that cannot be read as HDF5.
var (
	ErrEmpty   = errors.New("file is empty (0 bytes)")
	ErrNotHDF5 = errors.New("not an HDF5 file (no HDF5 signature found)")
	ErrDamaged = errors.New("HDF5 file cannot be opened: truncated or damaged")
)

// OpenError says which file could not be opened and why.
type OpenError struct {
	File string
	Err  error
}

func (e *OpenError) Error() string { return e.File + ": " + e.Err.Error() }
func (e *OpenError) Unwrap() error { return e.Err }

// Error is a failed HDF5 call on one object.
type Error struct {
	Op   string // what was attempted, e.g. "read attribute"
	Path string // HDF5 path
	Name string // attribute name, if any
}

func (e *Error) Error() string {
	if e.Name != "" {
		return fmt.Sprintf("hdf5: %s %s@%s failed", e.Op, e.Path, e.Name)
	}
	return fmt.Sprintf("hdf5: %s %s failed", e.Op, e.Path)
}

// File is an open HDF5 file: opened through gonum's binding, or created
// by the shim (which sets file-format properties gonum does not expose).
type File struct {
	f        *hdf5.File // nil for files made by Create
	raw      C.hid_t    // the shim's file id, when f is nil
	open     bool
	path     string
	writable bool
	image    unsafe.Pointer // C copy of an in-memory file, freed on Close
}

// signature is the HDF5 format signature; the superblock may sit at byte 0,
// 512, 1024, 2048, ... (HDF5 File Format Specification, section II.A).
var signature = []byte{0x89, 'H', 'D', 'F', '\r', '\n', 0x1a, '\n'}

// sniff checks that path is a non-empty file carrying the HDF5 signature,
// before the C library sees it.
func sniff(path string) error {
	fh, err := os.Open(path)
	if err != nil {
		return err
	}
	defer fh.Close()
	st, err := fh.Stat()
	if err != nil {
		return err
	}
	if st.IsDir() {
		return errors.New("is a directory, not an HDF5 file")
	}
	if st.Size() == 0 {
		return ErrEmpty
	}
	buf := make([]byte, len(signature))
	for off := int64(0); off+int64(len(buf)) <= st.Size(); off = nextOffset(off) {
		if _, err := fh.ReadAt(buf, off); err != nil && err != io.EOF {
			return err
		}
		if bytes.Equal(buf, signature) {
			return nil
		}
	}
	return ErrNotHDF5
}

func nextOffset(off int64) int64 {
	if off == 0 {
		return 512
	}
	return off * 2
}

// Open opens an existing file read-only. A missing, empty, non-HDF5 or
// damaged file gives an *OpenError wrapping the cause.
func Open(path string) (*File, error) {
	if err := sniff(path); err != nil {
		var pe *os.PathError
		if errors.As(err, &pe) {
			return nil, &OpenError{File: path, Err: pe.Err}
		}
		return nil, &OpenError{File: path, Err: err}
	}
	lock()
	defer unlock()
	f, err := hdf5.OpenFile(path, hdf5.F_ACC_RDONLY)
	if err != nil {
		return nil, &OpenError{File: path, Err: ErrDamaged}
	}
	return &File{f: f, path: path, open: true}, nil
}

// OpenImage opens an HDF5 file held in memory (e.g. read from an archive
// without unpacking it), read-only. img must stay unchanged until Close.
func OpenImage(name string, img []byte) (*File, error) {
	if len(img) == 0 {
		return nil, &OpenError{File: name, Err: ErrEmpty}
	}
	if len(img) < len(signature) || !bytes.Equal(img[:len(signature)], signature) {
		return nil, &OpenError{File: name, Err: ErrNotHDF5}
	}
	lock()
	defer unlock()
	cbuf := C.CBytes(img) // C memory: HDF5 keeps the pointer
	id := C.tv_open_image(cbuf, C.size_t(len(img)))
	if id < 0 {
		C.free(cbuf)
		return nil, &OpenError{File: name, Err: ErrDamaged}
	}
	return &File{raw: id, path: name, open: true, image: cbuf}, nil
}

// Format selects the oldest HDF5 library whose file format a new file may
// use. Newer formats are smaller (compact groups, compact chunk indexes)
// but unreadable by older libraries.
type Format int

const (
	// FormatEarliest is readable by every HDF5 library.
	FormatEarliest Format = 0
	// Format18 is readable by HDF5 1.8 (2008) and later: groups are stored
	// compactly in object headers.
	Format18 Format = 18
	// Format110 is readable by HDF5 1.10 (2016) and later: chunk indexes
	// are extensible arrays.
	Format110 Format = 110
)

// CreateOptions tune a new file.
type CreateOptions struct {
	Format Format
	// IstoreK is the half-rank of chunk B-tree nodes (0 = library
	// default, 32); small values save space in files with few chunks.
	IstoreK int
}

// CreateWith makes a new file with the given options; it fails if path
// exists.
func CreateWith(path string, o CreateOptions) (*File, error) {
	lock()
	defer unlock()
	if _, err := os.Lstat(path); err == nil {
		return nil, &OpenError{File: path, Err: os.ErrExist}
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	id := C.tv_create(p, C.int(o.Format), C.int(o.IstoreK))
	if id < 0 {
		return nil, &OpenError{File: path, Err: errors.New("cannot create HDF5 file")}
	}
	return &File{raw: id, path: path, writable: true, open: true}, nil
}

// Create makes a new file; it fails if path exists (outputs are never
// overwritten silently).
func Create(path string) (*File, error) {
	lock()
	defer unlock()
	if _, err := os.Lstat(path); err == nil {
		return nil, &OpenError{File: path, Err: os.ErrExist}
	}
	f, err := hdf5.CreateFile(path, hdf5.F_ACC_EXCL)
	if err != nil {
		return nil, &OpenError{File: path, Err: errors.New("cannot create HDF5 file")}
	}
	return &File{f: f, path: path, writable: true, open: true}, nil
}

// Name is the file name given to Open or Create.
func (f *File) Name() string { return f.path }

// Close releases the file. It is safe to call twice.
func (f *File) Close() error {
	if f == nil || !f.open {
		return nil
	}
	lock()
	defer unlock()
	f.open = false
	var failed bool
	if f.f != nil {
		failed = f.f.Close() != nil
		f.f = nil
	} else {
		failed = C.tv_close_file(f.raw) < 0
	}
	if f.image != nil {
		C.free(f.image)
		f.image = nil
	}
	if failed {
		return &Error{Op: "close file", Path: f.path}
	}
	return nil
}

func (f *File) id() C.hid_t {
	if f.f != nil {
		return C.hid_t(f.f.ID())
	}
	return f.raw
}

// cstr converts s for C; the caller frees it.
func cstr(s string) *C.char { return C.CString(s) }

// OpenObjects counts HDF5 identifiers open in the whole process (files,
// groups, datasets, datatypes, attributes). Used by the leak test.
func OpenObjects() int {
	lock()
	defer unlock()
	return int(C.tv_obj_count())
}

// LibVersion is the version of the HDF5 C library in use.
func LibVersion() string {
	lock()
	defer unlock()
	v, err := hdf5.LibVersion()
	if err != nil {
		return "unknown"
	}
	return v.String()
}

// Kind is what a path names.
type Kind int

const (
	Missing Kind = iota
	Group
	Dataset
	NamedType
	DanglingSoftLink
	ExternalLink
	OtherObject
)

func (k Kind) String() string {
	return [...]string{"missing", "group", "dataset", "named datatype", "dangling soft link", "external link", "other object"}[k]
}

// Kind reports what path names; a path through missing groups is Missing.
func (f *File) Kind(path string) Kind {
	lock()
	defer unlock()
	return f.kind(path)
}

func (f *File) kind(path string) Kind {
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	k := C.tv_kind(f.id(), p)
	if k < 0 {
		return Missing
	}
	return Kind(k)
}

// Links lists the link names in group path, in name order.
func (f *File) Links(path string) ([]string, error) {
	lock()
	defer unlock()
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	n := C.tv_nlinks(f.id(), p)
	if n < 0 {
		return nil, &Error{Op: "list links of", Path: path}
	}
	names := make([]string, 0, int(n))
	for i := 0; i < int(n); i++ {
		s := C.tv_link_name(f.id(), p, C.hsize_t(i))
		if s == nil {
			return nil, &Error{Op: "read link name in", Path: path}
		}
		names = append(names, C.GoString(s))
		C.free(unsafe.Pointer(s))
	}
	return names, nil
}

// ObjectID identifies an HDF5 object: two paths are hard links to the same
// object exactly when their ObjectIDs are equal.
type ObjectID struct {
	FileNo uint64
	Token  [16]byte
}

// ObjectID returns the identity of the object at path.
func (f *File) ObjectID(path string) (ObjectID, error) {
	lock()
	defer unlock()
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var fileno C.ulong
	var tok [16]C.uchar
	if C.tv_object_id(f.id(), p, &fileno, &tok[0]) < 0 {
		return ObjectID{}, &Error{Op: "get object identity of", Path: path}
	}
	id := ObjectID{FileNo: uint64(fileno)}
	for i := range tok {
		id.Token[i] = byte(tok[i])
	}
	return id, nil
}
