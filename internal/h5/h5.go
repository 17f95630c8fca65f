// Package h5 is trajvault's HDF5 layer: a thin, leak-free wrapper over the
// HDF5 C library (Debian's libhdf5-dev) through the small C shim in shim.c
// (link and attribute iteration, string attributes of both kinds, chunked
// extendible datasets with stock filters, filter inspection, object
// identity, bounded reads). gonum.org/v1/hdf5 stays pinned for the Go
// reading recipe the data description gives users (tested in trajfile).
//
// Linking: by default through pkg-config (the shared library). With the
// build tag hdf5static the binary links Debian's libhdf5.a instead, given
// by the Makefile in CGO_LDFLAGS: the shared Debian build pulls in libcurl
// and about 30 other libraries for its network driver, and loading them
// doubled the start-up cost of every command.
//
// The serial HDF5 library is not thread-safe. Every exported function and
// method takes the package mutex, so callers may use the package from any
// goroutine; HDF5 work is serialised here and nowhere else. Appends to
// scale-offset datasets encode whole chunks in Go before taking it
// (direct.go): the filters are reproduced byte for byte up to deflate,
// and the chunks stored with H5Dwrite_chunk.
//
// No C type escapes this package. Paths are absolute HDF5 paths such as
// "/particles/all/position/value".
package h5

// #cgo !hdf5static pkg-config: hdf5
// #cgo LDFLAGS: -lm
// #include "shim.h"
import "C"

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"unsafe"
)

// mu guards every call into the HDF5 C library.
var mu sync.Mutex

// started says that the library was initialised (H5open); guarded by mu.
var started bool

// lock takes the library mutex and pins the goroutine to its OS thread, so
// that the per-thread error-printing switch and error stack apply to the
// calls that follow; a stale stack from an earlier call is dropped. The
// first call initialises the library: a command that never reads HDF5
// (--version, help, a worker's parent) does not pay for it at start-up.
func lock() {
	mu.Lock()
	runtime.LockOSThread()
	if !started {
		C.tv_init()
		started = true
	}
	C.tv_quiet()
	C.tv_err_reset()
}

func unlock() {
	runtime.UnlockOSThread()
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

// StackEntry is one entry of HDF5's error stack.
type StackEntry struct {
	Func  string // HDF5 function
	Major string // error class, e.g. "Low-level I/O"
	Minor string // e.g. "Write failed"
	Desc  string // HDF5's own description
}

// Error is a failed HDF5 operation on one object. Errno is the operating
// system's error when HDF5 reported one (e.g. ENOSPC on a full disk);
// errors.Is(err, syscall.ENOSPC) sees it. Stack is HDF5's error stack of
// the failing call, outermost call first.
type Error struct {
	File  string // file name given to Open or Create
	Op    string // what was attempted, e.g. "read attribute"
	Path  string // HDF5 path
	Name  string // attribute name, if any
	Errno syscall.Errno
	Stack []StackEntry
	Err   error // a cause found by this package, if any
}

// Error reads like "out.h5: write /p/v: no space left on device (HDF5:
// H5Dwrite: can't write data; ...)".
func (e *Error) Error() string {
	var b strings.Builder
	if e.File != "" {
		b.WriteString(e.File + ": ")
	}
	b.WriteString(e.Op + " " + e.Path)
	if e.Name != "" {
		b.WriteString("@" + e.Name)
	}
	switch {
	case e.Errno != 0:
		b.WriteString(": " + e.Errno.Error())
	case e.Err != nil:
		b.WriteString(": " + e.Err.Error())
	default:
		b.WriteString(": failed")
	}
	if len(e.Stack) > 0 {
		b.WriteString(" (HDF5: " + stackSummary(e.Stack) + ")")
	}
	return b.String()
}

// Unwrap gives the cause and the errno, so that errors.Is matches either.
func (e *Error) Unwrap() []error {
	var out []error
	if e.Err != nil {
		out = append(out, e.Err)
	}
	if e.Errno != 0 {
		out = append(out, e.Errno)
	}
	return out
}

// stackSummary keeps the outermost call and the two innermost entries,
// where HDF5 says what went wrong.
func stackSummary(st []StackEntry) string {
	part := func(s StackEntry) string { return s.Func + ": " + s.Desc }
	var parts []string
	if len(st) <= 3 {
		for _, s := range st {
			parts = append(parts, part(s))
		}
	} else {
		parts = []string{part(st[0]), "...", part(st[len(st)-2]), part(st[len(st)-1])}
	}
	return strings.Join(parts, "; ")
}

// hexAddress matches a pointer printed by HDF5 (at least 6 hex digits).
var hexAddress = regexp.MustCompile(`0x[0-9a-fA-F]{6,}`)

// takeStack collects the error stack kept by the shim for the failing
// call (caller holds the lock).
func takeStack() []StackEntry {
	var n C.size_t
	s := C.tv_err_take(&n)
	if s == nil {
		return nil
	}
	defer C.free(unsafe.Pointer(s))
	var out []StackEntry
	for _, line := range strings.Split(string(goBytes(unsafe.Pointer(s), n)), "\x1e") {
		f := strings.SplitN(line, "\x1f", 4)
		if len(f) == 4 {
			d := strings.Join(strings.Fields(f[3]), " ") // one line
			// Memory addresses ("current p = 0x7f21...") differ from run
			// to run: the same file must give the same message.
			d = hexAddress.ReplaceAllString(d, "0x...")
			out = append(out, StackEntry{Func: f[0], Major: f[1], Minor: f[2], Desc: d})
		}
	}
	return out
}

// stackErrno finds the errno HDF5's low-level drivers write into their
// messages ("..., errno = 28, error message = ..."; HDF5 1.10 source,
// H5FDsec2.c, the HSYS_GOTO_ERROR macro). The innermost entry wins.
func stackErrno(st []StackEntry) syscall.Errno {
	for i := len(st) - 1; i >= 0; i-- {
		d := st[i].Desc
		k := strings.Index(d, "errno = ")
		if k < 0 {
			continue
		}
		d = d[k+len("errno = "):]
		j := 0
		for j < len(d) && d[j] >= '0' && d[j] <= '9' {
			j++
		}
		if v, err := strconv.Atoi(d[:j]); err == nil && v > 0 {
			return syscall.Errno(v)
		}
	}
	return 0
}

// fail builds the error of a failed shim call from the kept stack, or
// from a shim failure code (caller holds the lock).
func (f *File) fail(op, path, name string, rc C.int) error {
	switch rc {
	case C.TV_E_EXTERNAL:
		return f.refusal(path)
	case C.TV_E_TYPE:
		return &Error{File: f.path, Op: op, Path: path, Name: name, Err: ErrUnsupportedType}
	case C.TV_E_SIZE:
		return &Error{File: f.path, Op: op, Path: path, Name: name, Err: ErrSizeMismatch}
	case C.TV_E_NOMEM:
		return &Error{File: f.path, Op: op, Path: path, Name: name, Err: ErrNoMemory}
	case C.TV_E_RANK:
		return &Error{File: f.path, Op: op, Path: path, Name: name, Err: ErrRank}
	}
	if f.ctx != nil && f.ctx.refused != 0 {
		return f.refusal(path)
	}
	st := takeStack()
	return &Error{File: f.path, Op: op, Path: path, Name: name, Stack: st, Errno: stackErrno(st)}
}

// Causes found by this package, carried in Error.Err.
var (
	// ErrUnsupportedType: a stored type that cannot be read safely as
	// numbers (a size other than 1, 2, 4 or 8 bytes, bit fields outside
	// the element, or a non-numeric class).
	ErrUnsupportedType = errors.New("stored datatype unfit for reading as numbers")
	ErrSizeMismatch    = errors.New("selection does not match the dataset or the buffer")
	ErrNoMemory        = errors.New("out of memory in the HDF5 layer")
	ErrRank            = fmt.Errorf("rank above %d", C.TV_MAXRANK)
	ErrClosed          = errors.New("file is closed")
)

// ErrOutside is matched (errors.Is) by every *ExternalError.
var ErrOutside = errors.New("refers to data outside the file")

// ExternalError is a refused reference to data outside the file. The
// target is named but was never opened.
type ExternalError struct {
	File   string
	Path   string // HDF5 path through which the reference was met
	Kind   string // "external link", "external storage", "virtual dataset source"
	Target string // file name (":" object name, for links and sources)
	Reason string // why it was refused
}

func (e *ExternalError) Error() string {
	return fmt.Sprintf("%s: %s: %s to %q refused (%s)", e.File, e.Path, e.Kind, e.Target, e.Reason)
}

func (e *ExternalError) Is(target error) bool { return target == ErrOutside }

func (f *File) refusal(path string) error {
	kind := map[C.int]string{C.TV_EXT_LINK: "external link", C.TV_EXT_STORAGE: "external storage",
		C.TV_EXT_VIRTUAL: "virtual dataset source"}[f.ctx.refused]
	e := &ExternalError{File: f.path, Path: path, Kind: kind,
		Target: C.GoString(&f.ctx.target[0]), Reason: C.GoString(&f.ctx.reason[0])}
	f.ctx.refused = 0
	C.tv_err_reset()
	return e
}

// ErrTooLarge is matched (errors.Is) by every *LimitError.
var ErrTooLarge = errors.New("exceeds the memory budget")

// DefaultMaxReadBytes is the memory one read may allocate unless
// OpenOptions.MaxReadBytes says otherwise: 512 MiB, so that a few reads
// alive at once stay under 1 GiB of RSS per command.
const DefaultMaxReadBytes int64 = 512 << 20

// LimitError is a dataset or attribute whose declared size, in memory,
// exceeds the read budget or does not fit in 64 bits. Nothing was
// allocated for it.
type LimitError struct {
	File, Path, Name string
	Shape            Shape
	Bytes            uint64 // memory the read would need; 0 when it overflows
	Overflow         bool
	Limit            int64
}

func (e *LimitError) Error() string {
	at := e.Path
	if e.Name != "" {
		at += "@" + e.Name
	}
	if e.Overflow {
		return fmt.Sprintf("%s: %s: declared shape %s overflows 64-bit sizes", e.File, at, e.Shape)
	}
	return fmt.Sprintf("%s: %s: declared shape %s needs %d bytes, above the read budget of %d (raise it with OpenOptions.MaxReadBytes)",
		e.File, at, e.Shape, e.Bytes, e.Limit)
}

func (e *LimitError) Is(target error) bool { return target == ErrTooLarge }

// OpenOptions tune reading. The zero value is the safe default.
type OpenOptions struct {
	// MaxReadBytes caps the memory a single read (dataset, rows or
	// attribute) may allocate; 0 means DefaultMaxReadBytes.
	MaxReadBytes int64
	// AllowExternalDir, if set, lets external links, external raw
	// storage and virtual-dataset sources resolve to regular files inside
	// this folder (relative names only, no "..", symbolic links resolved
	// before the check). Empty: all outside data is refused.
	AllowExternalDir string
}

// File is an open HDF5 file. It owns one shim file identifier and its
// access policy; no C type leaves the package.
type File struct {
	raw      C.hid_t
	ctx      *C.tv_ctx
	open     bool
	path     string
	writable bool
	budget   int64
	// libraryChunks: CreateOptions.LibraryChunks
	libraryChunks bool
}

// signature is the HDF5 format signature; the superblock may sit at byte 0,
// 512, 1024, 2048, ... (HDF5 File Format Specification, section II.A).
var signature = []byte{0x89, 'H', 'D', 'F', '\r', '\n', 0x1a, '\n'}

// sniff checks that path is a regular, non-empty file carrying the HDF5
// signature, before the C library sees it.
func sniff(path string) error {
	st, err := os.Stat(path)
	if err != nil {
		return err
	}
	if st.IsDir() {
		return errors.New("is a directory, not an HDF5 file")
	}
	if !st.Mode().IsRegular() {
		return errors.New("not a regular file (FIFO, device or socket)")
	}
	fh, err := os.Open(path)
	if err != nil {
		return err
	}
	defer fh.Close()
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

// newCtx makes the access policy of a file (caller holds the lock).
func newCtx(o OpenOptions) (*C.tv_ctx, error) {
	var dir *C.char
	if o.AllowExternalDir != "" {
		// HDF5 consults these variables before the prefixes set here
		// (HDF5 1.10 reference manual, H5Pset_elink_prefix,
		// H5Pset_efile_prefix, H5Pset_virtual_prefix).
		for _, v := range []string{"HDF5_EXT_PREFIX", "HDF5_EXTFILE_PREFIX", "HDF5_VDS_PREFIX"} {
			if os.Getenv(v) != "" {
				return nil, fmt.Errorf("AllowExternalDir cannot be confined while %s is set", v)
			}
		}
		abs, err := filepath.Abs(o.AllowExternalDir)
		if err == nil {
			abs, err = filepath.EvalSymlinks(abs)
		}
		if err != nil {
			return nil, fmt.Errorf("AllowExternalDir: %w", err)
		}
		dir = C.CString(abs)
		defer C.free(unsafe.Pointer(dir))
	}
	c := C.tv_ctx_new(dir)
	if c == nil {
		return nil, &Error{Op: "set up file access", Stack: takeStack(), Err: ErrNoMemory}
	}
	return c, nil
}

func budget(o OpenOptions) int64 {
	if o.MaxReadBytes > 0 {
		return o.MaxReadBytes
	}
	return DefaultMaxReadBytes
}

// Open opens an existing file read-only with the default OpenOptions. A
// missing, empty, non-HDF5 or damaged file gives an *OpenError wrapping
// the cause.
func Open(path string) (*File, error) { return OpenWith(path, OpenOptions{}) }

// OpenWith opens an existing file read-only.
func OpenWith(path string, o OpenOptions) (*File, error) { return openFile(path, o, false) }

// OpenRW opens an existing file for modification. trajvault's commands
// never modify inputs; tests use it to build fixtures that break one rule.
func OpenRW(path string) (*File, error) { return openFile(path, OpenOptions{}, true) }

func openFile(path string, o OpenOptions, rw bool) (*File, error) {
	if err := sniff(path); err != nil {
		var pe *os.PathError
		if errors.As(err, &pe) {
			return nil, &OpenError{File: path, Err: pe.Err}
		}
		return nil, &OpenError{File: path, Err: err}
	}
	lock()
	defer unlock()
	ctx, err := newCtx(o)
	if err != nil {
		return nil, &OpenError{File: path, Err: err}
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	w := C.int(0)
	if rw {
		w = 1
	}
	id := C.tv_open(ctx, p, w)
	if id < 0 {
		C.tv_err_reset()
		C.tv_ctx_free(ctx)
		return nil, &OpenError{File: path, Err: ErrDamaged}
	}
	return &File{raw: id, ctx: ctx, path: path, open: true, writable: rw, budget: budget(o)}, nil
}

// OpenImage opens an HDF5 file held in memory (e.g. read from an archive
// without unpacking it), read-only, with the default OpenOptions. The
// library keeps its own copy; nothing on disk is looked at, not even a
// file of the image's name.
func OpenImage(name string, img []byte) (*File, error) {
	return OpenImageWith(name, img, OpenOptions{})
}

// OpenImageWith is OpenImage with options.
func OpenImageWith(name string, img []byte, o OpenOptions) (*File, error) {
	if len(img) == 0 {
		return nil, &OpenError{File: name, Err: ErrEmpty}
	}
	if len(img) < len(signature) || !bytes.Equal(img[:len(signature)], signature) {
		return nil, &OpenError{File: name, Err: ErrNotHDF5}
	}
	lock()
	defer unlock()
	ctx, err := newCtx(o)
	if err != nil {
		return nil, &OpenError{File: name, Err: err}
	}
	// H5Pset_file_image copies img during the call, so Go memory may be
	// passed (cgo rules: C does not keep the pointer).
	id := C.tv_open_image(unsafe.Pointer(&img[0]), C.size_t(len(img)))
	if id < 0 {
		C.tv_err_reset()
		C.tv_ctx_free(ctx)
		return nil, &OpenError{File: name, Err: ErrDamaged}
	}
	return &File{raw: id, ctx: ctx, path: name, open: true, budget: budget(o)}, nil
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
	// LibraryChunks stores every chunk through the HDF5 library's own
	// filter pipeline instead of encoding whole chunks in Go (direct.go):
	// slower, same values; for comparisons.
	LibraryChunks bool
}

// CreateWith makes a new file with the given options; it fails if path
// exists.
func CreateWith(path string, o CreateOptions) (*File, error) {
	lock()
	defer unlock()
	if _, err := os.Lstat(path); err == nil {
		return nil, &OpenError{File: path, Err: os.ErrExist}
	}
	ctx, err := newCtx(OpenOptions{})
	if err != nil {
		return nil, &OpenError{File: path, Err: err}
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	id := C.tv_create(p, C.int(o.Format), C.int(o.IstoreK))
	if id < 0 {
		st := takeStack()
		C.tv_ctx_free(ctx)
		return nil, &OpenError{File: path, Err: &Error{File: path, Op: "create file", Path: "/", Stack: st, Errno: stackErrno(st)}}
	}
	return &File{raw: id, ctx: ctx, path: path, writable: true, open: true, budget: DefaultMaxReadBytes, libraryChunks: o.LibraryChunks}, nil
}

// Create makes a new file in the library's default (earliest) format; it
// fails if path exists (outputs are never overwritten silently).
func Create(path string) (*File, error) { return CreateWith(path, CreateOptions{}) }

// Name is the file name given to Open or Create.
func (f *File) Name() string { return f.path }

// Close releases the file; pending writes are flushed, so a full disk may
// show here first. It is safe to call twice.
func (f *File) Close() error {
	if f == nil || !f.open {
		return nil
	}
	lock()
	defer unlock()
	f.open = false
	var err error
	if rc := C.tv_close_file(f.raw); rc < 0 {
		err = f.fail("close file", "/", "", rc)
	}
	C.tv_ctx_free(f.ctx)
	f.ctx = nil
	return err
}

func (f *File) id() C.hid_t { return f.raw }

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
	var a, b, c C.uint
	if C.tv_libversion(&a, &b, &c) < 0 {
		return "unknown"
	}
	return fmt.Sprintf("%d.%d.%d", a, b, c)
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
	if !f.open {
		return Missing
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	k := C.tv_kind(f.ctx, f.id(), p)
	f.ctx.refused = 0 // a path through a refused external link is Missing
	if k < 0 {
		return Missing
	}
	return Kind(k)
}

// readable reports a closed file as an error (caller holds the lock).
func (f *File) readable(op, path, name string) error {
	if !f.open {
		return &Error{File: f.path, Op: op, Path: path, Name: name, Err: ErrClosed}
	}
	return nil
}

// Links lists the link names in group path, in name order.
func (f *File) Links(path string) ([]string, error) {
	lock()
	defer unlock()
	if err := f.readable("list links of", path, ""); err != nil {
		return nil, err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var n C.long
	var total C.size_t
	s := C.tv_link_names(f.ctx, f.id(), p, &n, &total)
	if s == nil {
		return nil, f.fail("list links of", path, "", -1)
	}
	defer C.free(unsafe.Pointer(s))
	return unpack(C.GoBytes(unsafe.Pointer(s), C.int(total)), int(n)), nil
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
	if err := f.readable("get object identity of", path, ""); err != nil {
		return ObjectID{}, err
	}
	var fileno C.ulong
	var tok [16]C.uchar
	if rc := C.tv_object_id(f.ctx, f.id(), p, &fileno, &tok[0]); rc < 0 {
		return ObjectID{}, f.fail("get object identity of", path, "", rc)
	}
	id := ObjectID{FileNo: uint64(fileno)}
	for i := range tok {
		id.Token[i] = byte(tok[i])
	}
	return id, nil
}
