package h5

// #include "shim.h"
import "C"

import (
	"errors"
	"fmt"
	"math"
	"slices"
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
			return &Error{File: f.path, Op: "create group", Path: cur, Err: errors.New("a non-group object is in the way")}
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
	if rc := C.tv_hardlink(f.ctx, f.id(), s, d); rc < 0 {
		return f.fail("hard-link "+src+" as", dst, "", rc)
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
	if rc := C.tv_softlink(f.ctx, f.id(), s, d); rc < 0 {
		return f.fail("soft-link "+target+" as", dst, "", rc)
	}
	return nil
}

// Writer writes one dataset. Like archive/tar's Writer it keeps the first
// error: every later call returns it, and calls after Close fail. A
// Writer is used by one goroutine at a time (its chunk buffers are its
// own); different Writers may append concurrently.
type Writer struct {
	f     *File
	path  string
	id    C.hid_t
	dtype DType
	row   int // elements per row along dimension 0
	rows  int // size of dimension 0
	err   error
	// direct, when set, stores whole chunks encoded in Go (direct.go).
	direct *direct
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
	id := C.tv_dset_create(f.ctx, f.id(), p, C.int(spec.Type), C.int(rank), &dims[0], &maxd[0], chunkp, &fl)
	if id < 0 {
		return nil, f.fail("create dataset", path, "", C.int(max(id, -100)))
	}
	w := &Writer{f: f, path: path, id: id, dtype: spec.Type, row: row}
	if rank > 0 {
		w.rows = spec.Dims[0]
	}
	if !f.libraryChunks {
		w.direct = newDirect(id, spec)
	}
	return w, nil
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
	id := C.tv_dset_create_strings(f.ctx, f.id(), p, packed, C.int(len(values)), 0)
	if id < 0 {
		return f.fail("create string dataset", path, "", C.int(max(id, -100)))
	}
	C.tv_dset_close(id)
	return nil
}

// memBufSize is memBuf with the element size in bytes.
func memBufSize(data any) (C.int, unsafe.Pointer, int, int, error) {
	code, p, n, err := memBuf0(data)
	size := map[C.int]int{C.TV_T_F64: 8, C.TV_T_F32: 4, C.TV_T_I64: 8, C.TV_T_I32: 4, C.TV_T_U8: 1}[code]
	return code, p, n, size, err
}

// memBuf0 maps a Go slice to its HDF5 memory type and first element.
func memBuf0(data any) (C.int, unsafe.Pointer, int, error) {
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
// Whole chunks of a float64, int64 or int32 dataset with the
// scale-offset filter are encoded here and stored directly (direct.go)
// unless the file was created with CreateOptions.LibraryChunks; the
// values read back are the same.
func (w *Writer) Append(data any) error {
	if w.err != nil {
		return w.err
	}
	code, ptr, n, size, err := memBufSize(data)
	if err != nil {
		w.err = err
		return err
	}
	if n == 0 {
		return nil
	}
	if n%w.row != 0 {
		w.err = &Error{File: w.f.path, Op: fmt.Sprintf("append %d values (rows of %d) to", n, w.row), Path: w.path, Err: ErrSizeMismatch}
		return w.err
	}
	if w.direct != nil {
		var done bool
		switch d := data.(type) {
		case []float64:
			if w.dtype == Float64 {
				done, err = appendDirect(w, d, code, size)
			}
		case []int64:
			if w.dtype == Int64 {
				done, err = appendDirect(w, d, code, size)
			}
		case []int32:
			if w.dtype == Int32 {
				done, err = appendDirect(w, d, code, size)
			}
		}
		if err != nil {
			w.err = err
			return err
		}
		if done {
			w.rows += n / w.row
			return nil
		}
	}
	lock()
	defer unlock()
	if rc := C.tv_dset_append(w.id, code, C.hsize_t(n/w.row), ptr, C.size_t(n*size)); rc < 0 {
		w.err = w.f.fail("append to", w.path, "", rc)
		return w.err
	}
	w.rows += n / w.row
	return nil
}

// Write writes the whole dataset at its current size.
func (w *Writer) Write(data any) error {
	if w.err != nil {
		return w.err
	}
	code, ptr, n, size, err := memBufSize(data)
	if err != nil {
		w.err = err
		return err
	}
	if n == 0 {
		return nil
	}
	lock()
	defer unlock()
	if rc := C.tv_dset_write(w.id, code, ptr, C.size_t(n*size)); rc < 0 {
		w.err = w.f.fail("write", w.path, "", rc)
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
	var err error
	if w.err == nil && rc < 0 {
		err = w.f.fail("close dataset", w.path, "", rc)
	}
	unlock()
	w.id = -1
	if w.err != nil {
		err = w.err
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
	StorageBytes int64 // bytes allocated in the file; -1 from Describe
}

// LogicalBytes is the uncompressed size of the data; math.MaxInt64 when
// the declared shape overflows.
func (d DatasetInfo) LogicalBytes() int64 {
	b, ok := d.Shape.Bytes(d.Type.Size)
	if !ok || b > math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(b)
}

// Info describes the dataset at path. A dataset whose data lies outside
// the file (external storage, virtual dataset) is described and an
// *ExternalError returned with the description.
func (f *File) Info(path string) (DatasetInfo, error) { return f.info(path, true) }

// Describe is Info without StorageBytes (left at -1) and Filters (nil):
// for readers that need the type, shape and chunking only. The stored
// size of chunked data is the sum over every chunk (H5Dget_storage_size
// walks the whole chunk index), which on a long run costs more than
// reading a window of it. Outside data is refused as by Info.
func (f *File) Describe(path string) (DatasetInfo, error) { return f.info(path, false) }

func (f *File) info(path string, full bool) (DatasetInfo, error) {
	lock()
	defer unlock()
	if err := f.readable("describe dataset", path, ""); err != nil {
		return DatasetInfo{}, err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var ci C.tv_info
	var st C.tv_storage
	want := C.int(0)
	if full {
		want = 1
	}
	rc := C.tv_dset_info(f.ctx, f.id(), p, &ci, &st, want)
	if rc < 0 && rc != C.TV_E_EXTERNAL {
		return DatasetInfo{}, f.fail("describe dataset", path, "", rc)
	}
	var d DatasetInfo
	d.Type, d.Shape = convertInfo(&ci)
	d.Layout = map[C.int]string{0: "compact", 1: "contiguous", 2: "chunked", 3: "virtual"}[st.layout]
	if st.nexternal > 0 {
		d.Layout = "external"
	}
	if rc == C.TV_E_EXTERNAL {
		return d, f.fail("describe dataset", path, "", rc)
	}
	if st.layout == 2 {
		for i := 0; i < d.Shape.Rank; i++ {
			d.Chunk = append(d.Chunk, clampInt(uint64(st.chunk[i])))
		}
	}
	if !full {
		d.StorageBytes = -1
		return d, nil
	}
	d.StorageBytes = int64(min(uint64(st.storage), math.MaxInt64))
	for i := 0; i < int(st.nfilters); i++ {
		var id C.uint
		var name [64]C.char
		var cd [16]C.uint
		ncd := C.size_t(len(cd))
		if rc := C.tv_dset_filter(f.ctx, f.id(), p, C.int(i), &id, &name[0], C.size_t(len(name)), &cd[0], &ncd); rc < 0 {
			return d, f.fail("read filter pipeline of", path, "", rc)
		}
		name[len(name)-1] = 0
		fl := Filter{ID: int(id), Name: C.GoString(&name[0])}
		for j := 0; j < int(ncd) && j < len(cd); j++ {
			fl.Params = append(fl.Params, uint32(cd[j]))
		}
		d.Filters = append(d.Filters, fl)
	}
	return d, nil
}

// readBlockBytes bounds one H5Dread: long datasets are read by hyperslabs
// of whole rows of about this size, so the library's own buffers (type
// conversion, fill values, chunk cache) stay small whatever the shape.
const readBlockBytes = 8 << 20

// ReadFloat64 reads a whole numeric dataset converted to float64.
func (f *File) ReadFloat64(path string) ([]float64, Shape, error) {
	return readAll[float64](f, path, C.TV_T_F64)
}

// ReadInt64 reads a whole integer dataset converted to int64.
func (f *File) ReadInt64(path string) ([]int64, Shape, error) {
	return readAll[int64](f, path, C.TV_T_I64)
}

// ReadRows reads rows [start, start+count) along dimension 0 of a dataset
// with the given shape, converted to float64; used to stream long
// datasets. shape must be the dataset's own (from Info).
func (f *File) ReadRows(path string, shape Shape, start, count int) ([]float64, error) {
	lock()
	defer unlock()
	out, _, err := readRowsLocked[float64](f, path, C.TV_T_F64, &shape, start, count, nil)
	return out, err
}

// ReadRowsInto is ReadRows into dst's memory when it is large enough
// (else a new slice): a caller streaming blocks of rows reuses one
// buffer instead of leaving one behind per block.
func (f *File) ReadRowsInto(path string, shape Shape, start, count int, dst []float64) ([]float64, error) {
	lock()
	defer unlock()
	out, _, err := readRowsLocked[float64](f, path, C.TV_T_F64, &shape, start, count, dst)
	return out, err
}

func readAll[T float64 | int64](f *File, path string, code C.int) ([]T, Shape, error) {
	lock()
	defer unlock()
	return readRowsLocked[T](f, path, code, nil, 0, -1, nil)
}

// readRowsLocked reads rows [start, start+count) (count -1: to the end)
// of a numeric dataset, checking the declared shape against the budget
// before allocating and reading by bounded hyperslabs. want, if set,
// must equal the dataset's shape. The rows go into dst when its
// capacity holds them (the budget is checked all the same).
func readRowsLocked[T float64 | int64](f *File, path string, code C.int, want *Shape, start, count int, dst []T) ([]T, Shape, error) {
	const op = "read dataset"
	if err := f.readable(op, path, ""); err != nil {
		return nil, Shape{}, err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var ci C.tv_info
	var rc C.int
	d := C.tv_dset_open_checked(f.ctx, f.id(), p, &ci, &rc)
	if d < 0 {
		return nil, Shape{}, f.fail(op, path, "", rc)
	}
	defer C.tv_dset_close(d)
	_, shape := convertInfo(&ci)
	if want != nil && (want.Rank != shape.Rank || !slices.Equal(want.Dims, shape.Dims)) {
		return nil, shape, &Error{File: f.path, Op: fmt.Sprintf("read rows of (shape %s given, file has %s)", want, shape), Path: path, Err: ErrSizeMismatch}
	}
	var zero T
	es := int(unsafe.Sizeof(zero))
	if shape.Rank <= 0 { // scalar or null dataspace
		if want != nil {
			return nil, shape, &Error{File: f.path, Op: "read rows of a scalar", Path: path, Err: ErrSizeMismatch}
		}
		if shape.Rank < 0 {
			return []T{}, shape, nil
		}
		out := make([]T, 1)
		if rc := C.tv_dset_read_block(d, code, 0, nil, nil, unsafe.Pointer(&out[0]), C.size_t(es)); rc < 0 {
			return nil, shape, f.fail(op, path, "", rc)
		}
		return out, shape, nil
	}
	rows := shape.Dims[0]
	if count < 0 {
		count = rows - start
	}
	if start < 0 || count < 0 || start > rows || count > rows-start {
		return nil, shape, &Error{File: f.path, Op: fmt.Sprintf("read rows %d..%d of", start, start+count), Path: path, Err: ErrSizeMismatch}
	}
	sel := shape
	sel.Dims = slices.Clone(shape.Dims)
	sel.Dims[0] = count
	n, err := f.checkBudget(path, "", sel, es)
	if err != nil {
		return nil, shape, err
	}
	var out []T
	if cap(dst) >= n {
		out = dst[:n]
	} else {
		out = make([]T, n)
	}
	if n == 0 {
		return out, shape, nil
	}
	rowLen := n / count
	perBlock := max(1, readBlockBytes/max(1, rowLen*es))
	st := make([]C.hsize_t, shape.Rank)
	ct := make([]C.hsize_t, shape.Rank)
	for i := range ct {
		ct[i] = C.hsize_t(shape.Dims[i])
	}
	for r := 0; r < count; r += perBlock {
		k := min(perBlock, count-r)
		st[0], ct[0] = C.hsize_t(start+r), C.hsize_t(k)
		blk := out[r*rowLen : (r+k)*rowLen]
		if rc := C.tv_dset_read_block(d, code, C.int(shape.Rank), &st[0], &ct[0], unsafe.Pointer(&blk[0]), C.size_t(len(blk)*es)); rc < 0 {
			return nil, shape, f.fail(op, path, "", rc)
		}
	}
	return out, shape, nil
}

// ReadStrings reads a string dataset, fixed or variable length, within the
// read budget.
func (f *File) ReadStrings(path string) ([]string, error) {
	info, err := f.Info(path)
	if err != nil {
		return nil, err
	}
	lock()
	defer unlock()
	if err := f.readable("read string dataset", path, ""); err != nil {
		return nil, err
	}
	count, err := f.checkBudget(path, "", info.Shape, 1)
	if err != nil {
		return nil, err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var total C.size_t
	var rc C.int
	s := C.tv_dset_read_strings(f.ctx, f.id(), p, C.size_t(f.budget), &total, &rc)
	if s == nil {
		return nil, f.fail("read string dataset", path, "", rc)
	}
	defer C.free(unsafe.Pointer(s))
	return unpack(goBytes(unsafe.Pointer(s), total), count), nil
}

// createGroup makes one group.
func (f *File) createGroup(path string) error {
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	if rc := C.tv_group_create(f.ctx, f.raw, p); rc < 0 {
		return f.fail("create group", path, "", rc)
	}
	return nil
}
