package h5

// #include "shim.h"
import "C"

import (
	"fmt"
	"strings"
	"unsafe"
)

// DType is a stored numeric type; files are always written little-endian.
type DType int

const (
	Float64 DType = C.TV_T_F64
	Float32 DType = C.TV_T_F32
	Int64   DType = C.TV_T_I64
	Int32   DType = C.TV_T_I32
	Int16   DType = C.TV_T_I16
	Int8    DType = C.TV_T_I8
	Uint8   DType = C.TV_T_U8
)

// Filters selects stock HDF5 filters, the ones every HDF5 build decodes.
// They are applied in the order scale-offset, n-bit, shuffle, deflate,
// fletcher32 (lossy and bit-packing first, checksum last).
type Filters struct {
	Shuffle bool
	Deflate int // gzip level 1-9; 0 = off
	// ScaleOffsetFloat turns on the scale-offset filter for floats in
	// D-scaling mode, keeping ScaleOffsetDigits decimal digits after the
	// point: values are stored as round(x 10^D) in the fewest bits that
	// hold the chunk's range (HDF5 User's Guide, scale-offset filter).
	ScaleOffsetFloat  bool
	ScaleOffsetDigits int
	// ScaleOffsetInt turns on lossless scale-offset for integers.
	ScaleOffsetInt bool
	NBit           bool
	Fletcher32     bool
}

// DatasetSpec describes a dataset to create. Dims are the initial sizes;
// MaxDims entries may be Unlimited (needed to append); Chunk is required
// for filters and unlimited dimensions, nil for contiguous storage.
type DatasetSpec struct {
	Type    DType
	Dims    []int
	MaxDims []int
	Chunk   []int
	Filters Filters
}

// CreateGroup creates the group at path and any missing parents.
func (f *File) CreateGroup(path string) error {
	lock()
	defer unlock()
	if err := f.checkWritable("create group", path); err != nil {
		return err
	}
	if path == "/" {
		return nil
	}
	parts := strings.Split(strings.Trim(path, "/"), "/")
	cur := ""
	for _, part := range parts {
		cur += "/" + part
		switch f.kind(cur) {
		case Group:
			continue
		case Missing:
			if err := f.createGroup(cur); err != nil {
				return err
			}
		default:
			return &Error{Op: "create group (a non-group object is in the way)", Path: cur}
		}
	}
	return nil
}

// HardLink makes dst a second name for the object at src.
func (f *File) HardLink(src, dst string) error {
	lock()
	defer unlock()
	if err := f.checkWritable("link", dst); err != nil {
		return err
	}
	s, d := cstr(src), cstr(dst)
	defer C.free(unsafe.Pointer(s))
	defer C.free(unsafe.Pointer(d))
	if C.tv_hardlink(f.id(), s, d) < 0 {
		return &Error{Op: "hard-link " + src + " as", Path: dst}
	}
	return nil
}

// SoftLink makes dst a symbolic link to target.
func (f *File) SoftLink(target, dst string) error {
	lock()
	defer unlock()
	if err := f.checkWritable("link", dst); err != nil {
		return err
	}
	s, d := cstr(target), cstr(dst)
	defer C.free(unsafe.Pointer(s))
	defer C.free(unsafe.Pointer(d))
	if C.tv_softlink(f.id(), s, d) < 0 {
		return &Error{Op: "soft-link " + target + " as", Path: dst}
	}
	return nil
}

// Writer writes one dataset. Like archive/tar's Writer it keeps the first
// error: every later call returns it, and calls after Close fail.
type Writer struct {
	f     *File
	path  string
	id    C.hid_t
	dtype DType
	row   int // elements per row along dimension 0
	err   error
}

// CreateDataset creates a dataset and returns a Writer for it. Missing
// parent groups are created.
func (f *File) CreateDataset(path string, spec DatasetSpec) (*Writer, error) {
	lock()
	defer unlock()
	if err := f.checkWritable("create dataset", path); err != nil {
		return nil, err
	}
	rank := len(spec.Dims)
	if rank > C.TV_MAXRANK || (spec.MaxDims != nil && len(spec.MaxDims) != rank) || (spec.Chunk != nil && len(spec.Chunk) != rank) {
		panic(fmt.Sprintf("h5: CreateDataset %s: dims, maxdims and chunk ranks differ", path))
	}
	dims := make([]C.hsize_t, C.TV_MAXRANK)
	maxd := make([]C.hsize_t, C.TV_MAXRANK)
	chunk := make([]C.hsize_t, C.TV_MAXRANK)
	row := 1
	for i := 0; i < rank; i++ {
		dims[i] = C.hsize_t(spec.Dims[i])
		maxd[i] = dims[i]
		if spec.MaxDims != nil {
			if spec.MaxDims[i] == Unlimited {
				maxd[i] = C.hsize_t(^uint64(0))
			} else {
				maxd[i] = C.hsize_t(spec.MaxDims[i])
			}
		}
		if spec.Chunk != nil {
			chunk[i] = C.hsize_t(spec.Chunk[i])
		}
		if i > 0 {
			row *= spec.Dims[i]
		}
	}
	fl := C.tv_filters{deflate: -1, scaleoffset: -1}
	if spec.Filters.Shuffle {
		fl.shuffle = 1
	}
	if spec.Filters.Deflate > 0 {
		fl.deflate = C.int(spec.Filters.Deflate)
	}
	if spec.Filters.ScaleOffsetFloat {
		fl.scaleoffset, fl.scaleoffset_factor = 0, C.int(spec.Filters.ScaleOffsetDigits)
	} else if spec.Filters.ScaleOffsetInt {
		fl.scaleoffset, fl.scaleoffset_factor = 1, 0
	}
	if spec.Filters.NBit {
		fl.nbit = 1
	}
	if spec.Filters.Fletcher32 {
		fl.fletcher32 = 1
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var chunkp *C.hsize_t
	if spec.Chunk != nil {
		chunkp = &chunk[0]
	}
	id := C.tv_dset_create(f.id(), p, C.int(spec.Type), C.int(rank), &dims[0], &maxd[0], chunkp, &fl)
	if id < 0 {
		return nil, &Error{Op: "create dataset", Path: path}
	}
	return &Writer{f: f, path: path, id: id, dtype: spec.Type, row: row}, nil
}

// CreateStrings writes a 1-D fixed-length string dataset.
func (f *File) CreateStrings(path string, values []string) error {
	lock()
	defer unlock()
	if err := f.checkWritable("create dataset", path); err != nil {
		return err
	}
	packed, err := pack(values)
	if err != nil {
		return err
	}
	defer C.free(unsafe.Pointer(packed))
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	id := C.tv_dset_create_strings(f.id(), p, packed, C.int(len(values)), 0)
	if id < 0 {
		return &Error{Op: "create string dataset", Path: path}
	}
	C.tv_dset_close(id)
	return nil
}

// memBuf maps a Go slice to its HDF5 memory type and first element.
func memBuf(data any) (C.int, unsafe.Pointer, int, error) {
	switch d := data.(type) {
	case []float64:
		if len(d) == 0 {
			return C.TV_T_F64, nil, 0, nil
		}
		return C.TV_T_F64, unsafe.Pointer(&d[0]), len(d), nil
	case []float32:
		if len(d) == 0 {
			return C.TV_T_F32, nil, 0, nil
		}
		return C.TV_T_F32, unsafe.Pointer(&d[0]), len(d), nil
	case []int64:
		if len(d) == 0 {
			return C.TV_T_I64, nil, 0, nil
		}
		return C.TV_T_I64, unsafe.Pointer(&d[0]), len(d), nil
	case []int32:
		if len(d) == 0 {
			return C.TV_T_I32, nil, 0, nil
		}
		return C.TV_T_I32, unsafe.Pointer(&d[0]), len(d), nil
	case []uint8:
		if len(d) == 0 {
			return C.TV_T_U8, nil, 0, nil
		}
		return C.TV_T_U8, unsafe.Pointer(&d[0]), len(d), nil
	}
	return 0, nil, 0, fmt.Errorf("h5: unsupported buffer type %T", data)
}

// Append adds rows along dimension 0; len(data) must be a whole number of
// rows. data is a []float64, []float32, []int64, []int32 or []uint8.
func (w *Writer) Append(data any) error {
	if w.err != nil {
		return w.err
	}
	code, ptr, n, err := memBuf(data)
	if err != nil {
		w.err = err
		return err
	}
	if n == 0 {
		return nil
	}
	if n%w.row != 0 {
		w.err = &Error{Op: fmt.Sprintf("append %d values (rows of %d)", n, w.row), Path: w.path}
		return w.err
	}
	lock()
	defer unlock()
	if C.tv_dset_append(w.id, code, C.hsize_t(n/w.row), ptr) < 0 {
		w.err = &Error{Op: "append to dataset", Path: w.path}
	}
	return w.err
}

// Write writes the whole dataset at its current size.
func (w *Writer) Write(data any) error {
	if w.err != nil {
		return w.err
	}
	code, ptr, n, err := memBuf(data)
	if err != nil {
		w.err = err
		return err
	}
	if n == 0 {
		return nil
	}
	lock()
	defer unlock()
	if C.tv_dset_write(w.id, code, ptr) < 0 {
		w.err = &Error{Op: "write dataset", Path: w.path}
	}
	return w.err
}

var errWriterClosed = fmt.Errorf("h5: write to a closed dataset writer")

// Close releases the dataset; it returns the sticky error, if any. It is
// safe to call twice.
func (w *Writer) Close() error {
	if w.id < 0 {
		if w.err == errWriterClosed {
			return nil
		}
		return w.err
	}
	lock()
	rc := C.tv_dset_close(w.id)
	unlock()
	w.id = -1
	err := w.err
	if err == nil && rc < 0 {
		err = &Error{Op: "close dataset", Path: w.path}
	}
	w.err = errWriterClosed
	return err
}

// Filter is one entry of a dataset's filter pipeline.
type Filter struct {
	ID     int
	Name   string
	Params []uint32
}

// Stock filter identifiers (H5Zpublic.h); every HDF5 build decodes them.
const (
	FilterDeflate     = 1
	FilterShuffle     = 2
	FilterFletcher32  = 3
	FilterSzip        = 4
	FilterNBit        = 5
	FilterScaleOffset = 6
)

// Stock reports whether a filter ships with every HDF5 build (szip is
// optional in many builds, so it does not count).
func (fl Filter) Stock() bool {
	switch fl.ID {
	case FilterDeflate, FilterShuffle, FilterFletcher32, FilterNBit, FilterScaleOffset:
		return true
	}
	return false
}

// DatasetInfo describes a dataset without reading its data.
type DatasetInfo struct {
	Type         Type
	Shape        Shape
	Layout       string // compact, contiguous, chunked
	Chunk        []int
	Filters      []Filter
	StorageBytes int64 // bytes allocated in the file
}

// LogicalBytes is the uncompressed size of the data.
func (d DatasetInfo) LogicalBytes() int64 { return int64(d.Shape.Len()) * int64(d.Type.Size) }

// Info describes the dataset at path.
func (f *File) Info(path string) (DatasetInfo, error) {
	lock()
	defer unlock()
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var ci C.tv_info
	var st C.tv_storage
	if C.tv_dset_info(f.id(), p, &ci, &st) < 0 {
		return DatasetInfo{}, &Error{Op: "describe dataset", Path: path}
	}
	var d DatasetInfo
	d.Type, d.Shape = convertInfo(&ci)
	d.Layout = map[C.int]string{0: "compact", 1: "contiguous", 2: "chunked"}[st.layout]
	if st.layout == 2 {
		for i := 0; i < d.Shape.Rank; i++ {
			d.Chunk = append(d.Chunk, int(st.chunk[i]))
		}
	}
	d.StorageBytes = int64(st.storage)
	for i := 0; i < int(st.nfilters); i++ {
		var id C.uint
		var name [64]C.char
		var cd [16]C.uint
		ncd := C.size_t(len(cd))
		if C.tv_dset_filter(f.id(), p, C.int(i), &id, &name[0], C.size_t(len(name)), &cd[0], &ncd) < 0 {
			return d, &Error{Op: "read filter pipeline of", Path: path}
		}
		fl := Filter{ID: int(id), Name: C.GoString(&name[0])}
		for j := 0; j < int(ncd) && j < len(cd); j++ {
			fl.Params = append(fl.Params, uint32(cd[j]))
		}
		d.Filters = append(d.Filters, fl)
	}
	return d, nil
}

// ReadFloat64 reads a whole numeric dataset converted to float64.
func (f *File) ReadFloat64(path string) ([]float64, Shape, error) {
	info, err := f.Info(path)
	if err != nil {
		return nil, Shape{}, err
	}
	out := make([]float64, info.Shape.Len()+1)
	err = f.read(path, C.TV_T_F64, unsafe.Pointer(&out[0]), nil, nil)
	return out[:info.Shape.Len()], info.Shape, err
}

// ReadInt64 reads a whole integer dataset converted to int64.
func (f *File) ReadInt64(path string) ([]int64, Shape, error) {
	info, err := f.Info(path)
	if err != nil {
		return nil, Shape{}, err
	}
	out := make([]int64, info.Shape.Len()+1)
	err = f.read(path, C.TV_T_I64, unsafe.Pointer(&out[0]), nil, nil)
	return out[:info.Shape.Len()], info.Shape, err
}

// ReadRows reads rows [start, start+count) along dimension 0 of a dataset
// with the given shape, converted to float64; used to stream long datasets.
func (f *File) ReadRows(path string, shape Shape, start, count int) ([]float64, error) {
	if shape.Rank < 1 || start < 0 || count < 0 || start+count > shape.Dims[0] {
		return nil, &Error{Op: fmt.Sprintf("read rows %d..%d of", start, start+count), Path: path}
	}
	row := shape.Len() / max(shape.Dims[0], 1)
	out := make([]float64, row*count+1)
	st := make([]int, shape.Rank)
	cnt := append([]int(nil), shape.Dims...)
	st[0], cnt[0] = start, count
	err := f.read(path, C.TV_T_F64, unsafe.Pointer(&out[0]), st, cnt)
	return out[:row*count], err
}

func (f *File) read(path string, code C.int, buf unsafe.Pointer, start, count []int) error {
	lock()
	defer unlock()
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var rc C.int
	if start == nil {
		rc = C.tv_dset_read(f.id(), p, code, 0, nil, nil, buf)
	} else {
		st := make([]C.hsize_t, len(start))
		ct := make([]C.hsize_t, len(count))
		for i := range start {
			st[i], ct[i] = C.hsize_t(start[i]), C.hsize_t(count[i])
		}
		rc = C.tv_dset_read(f.id(), p, code, C.int(len(start)), &st[0], &ct[0], buf)
	}
	if rc < 0 {
		return &Error{Op: "read dataset", Path: path}
	}
	return nil
}

// ReadStrings reads a string dataset, fixed or variable length.
func (f *File) ReadStrings(path string) ([]string, error) {
	info, err := f.Info(path)
	if err != nil {
		return nil, err
	}
	lock()
	defer unlock()
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var total C.size_t
	s := C.tv_dset_read_strings(f.id(), p, &total)
	if s == nil {
		return nil, &Error{Op: "read string dataset", Path: path}
	}
	defer C.free(unsafe.Pointer(s))
	return unpack(C.GoBytes(unsafe.Pointer(s), C.int(total)), info.Shape.Len()), nil
}

// createGroup makes one group: through gonum for files it opened, through
// the shim for files the shim created.
func (f *File) createGroup(path string) error {
	if f.f != nil {
		g, err := f.f.CreateGroup(path)
		if err != nil {
			return &Error{Op: "create group", Path: path}
		}
		if err := g.Close(); err != nil {
			return &Error{Op: "close group", Path: path}
		}
		return nil
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	if C.tv_group_create(f.raw, p) < 0 {
		return &Error{Op: "create group", Path: path}
	}
	return nil
}
