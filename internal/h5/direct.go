package h5

// #include "shim.h"
import "C"

import (
	"encoding/binary"
	"fmt"
	"math"
	"sync"
	"unsafe"
)

// direct is a dataset's direct chunk path: Append encodes each whole
// chunk in Go (filterenc.go) and stores it with H5Dwrite_chunk, filter
// mask 0, instead of handing the values to the library's filter
// pipeline. Measured on a converted log (81.5 MB of text, scale-offset
// at 8-10 decimals, deflate 4, Fletcher-32; perf, CPU seconds): the
// library's pipeline (zlib, pow() per element, HDF5) was about a quarter
// of convert's CPU, this path is about a tenth (deflate half of it), and
// convert went from 2.9 to 2.3 CPU s. The encoding also runs outside the
// package mutex, so writers on other goroutines overlap.
//
// Rows before the first chunk boundary and after the last one (the
// partial last chunk of a run), and any chunk the encoders decline (a
// value that is not finite, a range needing 63 bits or more), go through
// the library as before. The dataset's filter pipeline and client data
// are the library's own, read back after creation.
type direct struct {
	dims  []int // dataset dimensions beyond the first (fixed)
	chunk []int // chunk dimensions
	// whole is set when chunks span every dimension beyond the first: a
	// chunk is then a run of whole rows of the appended values.
	whole  bool
	so     *scaleOffset
	stages []stage
	stored int // chunks stored by this path (for tests)
}

// encoder holds the buffers and compressors one append uses; they are
// pooled across datasets, so that memory follows the appends running at
// once rather than the number of datasets (a zlib writer alone holds
// several hundred KiB).
type encoder struct {
	raw, a, b []byte
	wide      []int64
	arena     []byte
	def       [10]*deflater // by level
}

var encoders = sync.Pool{New: func() any { return new(encoder) }}

type stageKind int

const (
	stageShuffle stageKind = iota
	stageDeflate
	stageFletcher
)

type stage struct {
	kind stageKind
	size int // shuffle: element size; deflate: level
}

// pipelineFilter is one filter of a created dataset's pipeline.
type pipelineFilter struct {
	id uint32
	cd []uint32
}

// newDirect builds the direct path of a new dataset from its pipeline
// as HDF5 stored it: scale-offset first, then any of shuffle, deflate
// and Fletcher-32. It returns nil when the pipeline has another filter
// or variant, no scale-offset, or chunks that do not tile the fixed
// dimensions (caller holds the lock).
func newDirect(id C.hid_t, spec DatasetSpec) *direct {
	rank := len(spec.Dims)
	if rank == 0 || spec.Chunk == nil || len(spec.Chunk) != rank {
		return nil
	}
	switch spec.Type {
	case Float64, Int64, Int32:
	default:
		return nil
	}
	d := &direct{dims: append([]int(nil), spec.Dims[1:]...), chunk: append([]int(nil), spec.Chunk...), whole: true}
	for i := 1; i < rank; i++ {
		if spec.Chunk[i] <= 0 || spec.Dims[i]%spec.Chunk[i] != 0 {
			return nil
		}
		if spec.Chunk[i] != spec.Dims[i] {
			d.whole = false
		}
	}
	if spec.Chunk[0] <= 0 {
		return nil
	}
	fl, ok := readPipeline(id)
	if !ok || len(fl) == 0 {
		return nil
	}
	for i, f := range fl {
		switch {
		case f.id == FilterScaleOffset && i == 0:
			so, ok := newScaleOffset(f.cd, pow10)
			if !ok || so.float != (spec.Type == Float64) || so.size != typeSize(spec.Type) {
				return nil
			}
			if n := uint64(f.cd[soNelmts]); n != uint64(d.chunkElems()) {
				return nil
			}
			d.so = &so
		case f.id == FilterShuffle && len(f.cd) == 1 && f.cd[0] > 0:
			d.stages = append(d.stages, stage{kind: stageShuffle, size: int(f.cd[0])})
		case f.id == FilterDeflate && len(f.cd) == 1 && f.cd[0] <= 9:
			d.stages = append(d.stages, stage{kind: stageDeflate, size: int(f.cd[0])})
		case f.id == FilterFletcher32:
			d.stages = append(d.stages, stage{kind: stageFletcher})
		default:
			return nil
		}
	}
	if d.so == nil {
		// Without scale-offset the chunk is shuffled float64 bytes, which
		// klauspost/compress at the same level stores about 7 % larger
		// than zlib (measured: convert --bit-exact of the demo log, 36.5
		// MB -> 39.2 MB); the library keeps those.
		return nil
	}
	return d
}

func typeSize(t DType) int {
	switch t {
	case Float64, Int64:
		return 8
	case Int32:
		return 4
	}
	return 0
}

func (d *direct) chunkElems() int {
	n := 1
	for _, c := range d.chunk {
		n *= c
	}
	return n
}

// readPipeline reads a dataset's filters and client data (caller holds
// the lock).
func readPipeline(id C.hid_t) ([]pipelineFilter, bool) {
	var out []pipelineFilter
	for i := 0; ; i++ {
		var fid, flags C.uint
		var cd [soNParams + 4]C.uint
		ncd := C.size_t(len(cd))
		n := C.tv_dset_pipeline_filter(id, C.int(i), &fid, &flags, &cd[0], &ncd)
		if n < 0 {
			C.tv_err_reset()
			return nil, false
		}
		if i >= int(n) {
			return out, true
		}
		if int(ncd) > len(cd) {
			return nil, false
		}
		f := pipelineFilter{id: uint32(fid)}
		for j := 0; j < int(ncd); j++ {
			f.cd = append(f.cd, uint32(cd[j]))
		}
		out = append(out, f)
	}
}

// pow10 is pow(10, d) and pow(10, -d) from the C library.
func pow10(d int) (float64, float64) {
	var up, down C.double
	C.tv_pow10(C.int(d), &up, &down)
	return float64(up), float64(down)
}

// encode runs one chunk's values (in the chunk's row-major order) through
// the pipeline. ok is false when the library must encode the chunk.
func (d *direct) encode(e *encoder, dst []byte, vals any) ([]byte, bool, error) {
	cur := e.raw[:0]
	switch v := vals.(type) {
	case []float64:
		if d.so != nil {
			var ok bool
			if cur, ok = d.so.soFloat(cur, v); !ok {
				return dst, false, nil
			}
		} else {
			for _, x := range v {
				cur = binary.LittleEndian.AppendUint64(cur, math.Float64bits(x))
			}
		}
	case []int64:
		if d.so != nil {
			var ok bool
			if cur, ok = d.so.soInt(cur, v); !ok {
				return dst, false, nil
			}
		} else {
			for _, x := range v {
				cur = binary.LittleEndian.AppendUint64(cur, uint64(x))
			}
		}
	case []int32:
		if d.so != nil {
			e.wide = e.wide[:0]
			for _, x := range v {
				e.wide = append(e.wide, int64(x))
			}
			var ok bool
			if cur, ok = d.so.soInt(cur, e.wide); !ok {
				return dst, false, nil
			}
		} else {
			for _, x := range v {
				cur = binary.LittleEndian.AppendUint32(cur, uint32(x))
			}
		}
	default:
		panic(fmt.Sprintf("h5: direct chunk of %T", vals))
	}
	e.raw = cur
	next := &e.a
	for _, s := range d.stages {
		out := (*next)[:0]
		switch s.kind {
		case stageShuffle:
			out = shuffleBytes(out, cur, s.size)
		case stageDeflate:
			var err error
			if e.def[s.size] == nil {
				e.def[s.size] = &deflater{level: s.size}
			}
			if out, err = e.def[s.size].deflate(out, cur); err != nil {
				return dst, false, err
			}
		case stageFletcher:
			out = append(out, cur...)
			out = binary.LittleEndian.AppendUint32(out, fletcher32(cur))
		}
		*next = out
		cur = out
		if next == &e.a {
			next = &e.b
		} else {
			next = &e.a
		}
	}
	return append(dst, cur...), true, nil
}

// directBatch bounds the encoded bytes an append holds before storing
// them: memory stays small when one append spans many chunks (per-atom
// time series of a large system). A variable for tests.
var directBatch = 4 << 20

// piece is one chunk of an append: encoded bytes arena[lo:hi], or, when
// the library must encode it, its values.
type piece struct {
	offset []C.hsize_t
	lo, hi int
	vals   any
}

// gather copies the chunk at origin (within the appended block of rows
// whose dimensions beyond the first are dims) from src into dst,
// row-major; the innermost dimension is copied as runs.
func gather[T any](dst, src []T, dims, chunk, origin []int) []T {
	rank := len(chunk)
	strides := make([]int, rank)
	strides[rank-1] = 1
	for i := rank - 2; i >= 0; i-- {
		strides[i] = strides[i+1] * dims[i+1]
	}
	if single(chunk[1:]) { // one element per row: a strided run
		off := 0
		for i := 0; i < rank; i++ {
			off += origin[i] * strides[i]
		}
		for r := 0; r < chunk[0]; r++ {
			dst = append(dst, src[off])
			off += strides[0]
		}
		return dst
	}
	idx := make([]int, rank)
	last := chunk[rank-1]
	for {
		off := 0
		for i := 0; i < rank; i++ {
			off += (origin[i] + idx[i]) * strides[i]
		}
		dst = append(dst, src[off:off+last]...)
		i := rank - 2
		for ; i >= 0; i-- {
			idx[i]++
			if idx[i] < chunk[i] {
				break
			}
			idx[i] = 0
		}
		if i < 0 {
			return dst
		}
	}
}

// single reports whether every extent in c is 1.
func single(c []int) bool {
	for _, n := range c {
		if n != 1 {
			return false
		}
	}
	return true
}

// appendDirect is Append for a dataset with a direct path: rows
// [w.rows, w.rows+k) of data, k = len(data)/w.row. It returns false,
// having done nothing, when no whole chunk lies in the range.
func appendDirect[T float64 | int64 | int32](w *Writer, data []T, code C.int, size int) (bool, error) {
	d := w.direct
	k := len(data) / w.row
	start, end := w.rows, w.rows+k
	c0 := d.chunk[0]
	a := (start + c0 - 1) / c0 * c0
	b := end / c0 * c0
	if a >= b {
		return false, nil
	}
	e := encoders.Get().(*encoder)
	defer encoders.Put(e)
	rank := len(d.chunk)
	dims := append([]int{k}, d.dims...)
	tiles := make([]int, rank) // chunk counts per dimension beyond the first
	ntiles := 1
	for i := 1; i < rank; i++ {
		tiles[i] = d.dims[i-1] / d.chunk[i]
		ntiles *= tiles[i]
	}
	ct := make([]C.hsize_t, rank)
	for i := range ct {
		ct[i] = C.hsize_t(d.chunk[i])
	}
	// rows writes rows [lo, hi) through the library (lock held).
	rows := func(lo, hi int) error {
		if lo >= hi {
			return nil
		}
		st := make([]C.hsize_t, rank)
		cnt := make([]C.hsize_t, rank)
		st[0], cnt[0] = C.hsize_t(lo), C.hsize_t(hi-lo)
		for i := 1; i < rank; i++ {
			cnt[i] = C.hsize_t(d.dims[i-1])
		}
		blk := data[(lo-start)*w.row : (hi-start)*w.row]
		if rc := C.tv_dset_write_box(w.id, code, C.int(rank), &st[0], &cnt[0], unsafe.Pointer(&blk[0]), C.size_t(len(blk)*size)); rc < 0 {
			return w.f.fail("append to", w.path, "", rc)
		}
		return nil
	}
	// store writes the encoded pieces, after extending the dataset and
	// writing the rows before the first whole chunk on the first call.
	var pieces []piece
	extended := false
	store := func() error {
		lock()
		defer unlock()
		if !extended {
			if rc := C.tv_dset_set_rows(w.id, C.hsize_t(end)); rc < 0 {
				return w.f.fail("append to", w.path, "", rc)
			}
			extended = true
			if err := rows(start, a); err != nil {
				return err
			}
		}
		for _, p := range pieces {
			if p.vals != nil {
				v := p.vals.([]T)
				if rc := C.tv_dset_write_box(w.id, code, C.int(rank), &p.offset[0], &ct[0], unsafe.Pointer(&v[0]), C.size_t(len(v)*size)); rc < 0 {
					return w.f.fail("append to", w.path, "", rc)
				}
				continue
			}
			enc := e.arena[p.lo:p.hi]
			if rc := C.tv_dset_write_chunk(w.id, &p.offset[0], unsafe.Pointer(&enc[0]), C.size_t(len(enc))); rc < 0 {
				return w.f.fail("append to", w.path, "", rc)
			}
			d.stored++
		}
		pieces = pieces[:0]
		e.arena = e.arena[:0]
		return nil
	}
	// Encode outside the lock, storing about every directBatch bytes.
	e.arena = e.arena[:0]
	var buf []T
	for t0 := a; t0 < b; t0 += c0 {
		for t := 0; t < ntiles; t++ {
			origin := make([]int, rank)
			origin[0] = t0 - start
			rest := t
			for i := rank - 1; i >= 1; i-- {
				origin[i] = rest % tiles[i] * d.chunk[i]
				rest /= tiles[i]
			}
			var vals []T
			if d.whole {
				vals = data[(t0-start)*w.row : (t0-start+c0)*w.row]
			} else {
				buf = gather(buf[:0], data, dims, d.chunk, origin)
				vals = buf
			}
			off := make([]C.hsize_t, rank)
			off[0] = C.hsize_t(t0)
			for i := 1; i < rank; i++ {
				off[i] = C.hsize_t(origin[i])
			}
			lo := len(e.arena)
			var ok bool
			var err error
			e.arena, ok, err = d.encode(e, e.arena, any(vals))
			if err != nil {
				return true, err
			}
			p := piece{offset: off, lo: lo, hi: len(e.arena)}
			if !ok {
				p.vals = any(append([]T(nil), vals...))
			}
			pieces = append(pieces, p)
			if len(e.arena) >= directBatch {
				if err := store(); err != nil {
					return true, err
				}
			}
		}
	}
	if err := store(); err != nil {
		return true, err
	}
	lock()
	defer unlock()
	return true, rows(b, end)
}

// RawChunk reads the chunk of the dataset at path whose first element is
// at offset, as stored in the file: its bytes with the filters applied
// and its filter mask (bit i set: filter i of the pipeline was skipped).
// The size is checked against the read budget before it is allocated.
func (f *File) RawChunk(path string, offset []int) (uint32, []byte, error) {
	const op = "read raw chunk of"
	lock()
	defer unlock()
	if err := f.readable(op, path, ""); err != nil {
		return 0, nil, err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var ci C.tv_info
	var rc C.int
	d := C.tv_dset_open_checked(f.ctx, f.id(), p, &ci, &rc)
	if d < 0 {
		return 0, nil, f.fail(op, path, "", rc)
	}
	defer C.tv_dset_close(d)
	if len(offset) != int(ci.rank) || len(offset) == 0 {
		return 0, nil, &Error{File: f.path, Op: op, Path: path, Err: ErrSizeMismatch}
	}
	off := make([]C.hsize_t, len(offset))
	for i, o := range offset {
		if o < 0 {
			return 0, nil, &Error{File: f.path, Op: op, Path: path, Err: ErrSizeMismatch}
		}
		off[i] = C.hsize_t(o)
	}
	var mask C.uint
	var n C.size_t
	if rc := C.tv_dset_read_chunk(d, &off[0], &mask, nil, 0, &n); rc < 0 && rc != C.TV_E_SIZE {
		return 0, nil, f.fail(op, path, "", rc)
	}
	if int64(n) > f.budget {
		return 0, nil, &LimitError{File: f.path, Path: path, Bytes: uint64(n), Limit: f.budget}
	}
	buf := make([]byte, max(int(n), 1))
	if rc := C.tv_dset_read_chunk(d, &off[0], &mask, unsafe.Pointer(&buf[0]), C.size_t(len(buf)), &n); rc < 0 {
		return 0, nil, f.fail(op, path, "", rc)
	}
	return uint32(mask), buf[:n], nil
}
