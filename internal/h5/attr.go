package h5

// #include "shim.h"
import "C"

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/bits"
	"strings"
	"unsafe"
)

// Class is an HDF5 datatype class, reduced to what trajvault checks.
type Class int

const (
	ClassOther Class = iota
	ClassInt
	ClassFloat
	ClassString
	ClassEnum
	ClassCompound
	ClassReference
)

func (c Class) String() string {
	return [...]string{"other", "integer", "float", "string", "enum", "compound", "reference"}[c]
}

// Type describes a stored datatype.
type Type struct {
	Class  Class
	Size   int  // bytes per element; fixed-length strings: their length
	Signed bool // integers only
	VarLen bool // variable-length strings only
}

func (t Type) String() string {
	switch t.Class {
	case ClassInt:
		if t.Signed {
			return fmt.Sprintf("int%d", 8*t.Size)
		}
		return fmt.Sprintf("uint%d", 8*t.Size)
	case ClassFloat:
		return fmt.Sprintf("float%d", 8*t.Size)
	case ClassString:
		if t.VarLen {
			return "string(variable)"
		}
		return fmt.Sprintf("string(%d)", t.Size)
	}
	return t.Class.String()
}

// Unlimited marks an unlimited maximum extent in Shape.MaxDims.
const Unlimited = -1

// Shape is a dataspace. Rank 0 is a scalar, -1 a null dataspace.
type Shape struct {
	Rank    int
	Dims    []int
	MaxDims []int
}

// Len is the number of elements. It never wraps: a count that does not
// fit in an int (possible only for shapes declared by a damaged or
// hostile file) gives math.MaxInt. Use Elements to tell.
func (s Shape) Len() int {
	n, ok := s.Elements()
	if !ok || n > math.MaxInt {
		return math.MaxInt
	}
	return int(n)
}

// Elements is the number of elements by checked multiplication; ok is
// false when the product of the dimensions overflows 64 bits.
func (s Shape) Elements() (n uint64, ok bool) {
	if s.Rank < 0 {
		return 0, true
	}
	n = 1
	for _, d := range s.Dims {
		if d < 0 {
			return 0, false
		}
		hi, lo := bits.Mul64(n, uint64(d))
		if hi != 0 {
			return 0, false
		}
		n = lo
	}
	return n, true
}

// Bytes is Elements times elemSize, checked the same way.
func (s Shape) Bytes(elemSize int) (uint64, bool) {
	n, ok := s.Elements()
	if !ok || elemSize < 0 {
		return 0, false
	}
	hi, lo := bits.Mul64(n, uint64(elemSize))
	return lo, hi == 0
}

func (s Shape) String() string {
	if s.Rank == 0 {
		return "scalar"
	}
	if s.Rank < 0 {
		return "null"
	}
	parts := make([]string, len(s.Dims))
	for i, d := range s.Dims {
		parts[i] = fmt.Sprint(d)
	}
	return "[" + strings.Join(parts, ",") + "]"
}

func convertInfo(ci *C.tv_info) (Type, Shape) {
	t := Type{Class: Class(ci.cls), Size: int(ci.size), Signed: ci.is_signed != 0, VarLen: ci.is_vlen != 0}
	s := Shape{Rank: int(ci.rank)}
	for i := 0; i < s.Rank; i++ {
		s.Dims = append(s.Dims, clampInt(uint64(ci.dims[i])))
		m := clampInt(uint64(ci.maxdims[i]))
		if ci.maxdims[i] == C.hsize_t(^uint64(0)) {
			m = Unlimited
		}
		s.MaxDims = append(s.MaxDims, m)
	}
	return t, s
}

// clampInt keeps a declared 64-bit extent from turning negative in an
// int; math.MaxInt then fails every budget check.
func clampInt(v uint64) int {
	if v > math.MaxInt {
		return math.MaxInt
	}
	return int(v)
}

// goBytes copies n bytes of C memory (C.GoBytes takes an int32 length).
func goBytes(p unsafe.Pointer, n C.size_t) []byte {
	if n == 0 {
		return nil
	}
	return bytes.Clone(unsafe.Slice((*byte)(p), int(n)))
}

// Attr is an attribute read back whole. Exactly one of Ints, Floats and
// Strings is filled, by class; enums, compounds and references carry only
// their type.
type Attr struct {
	Name    string
	Type    Type
	Shape   Shape
	Ints    []int64
	Floats  []float64
	Strings []string
}

// AttrNames lists the attribute names on the object at path, in name order.
func (f *File) AttrNames(path string) ([]string, error) {
	lock()
	defer unlock()
	if err := f.readable("list attributes of", path, ""); err != nil {
		return nil, err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	var n C.long
	var total C.size_t
	s := C.tv_attr_names(f.ctx, f.id(), p, &n, &total)
	if s == nil {
		return nil, f.fail("list attributes of", path, "", -1)
	}
	defer C.free(unsafe.Pointer(s))
	return unpack(goBytes(unsafe.Pointer(s), total), int(n)), nil
}

// HasAttr reports whether the object at path has attribute name.
func (f *File) HasAttr(path, name string) bool {
	names, err := f.AttrNames(path)
	if err != nil {
		return false
	}
	for _, n := range names {
		if n == name {
			return true
		}
	}
	return false
}

// Attr reads attribute name of the object at path. Numbers and strings
// are read only when their declared size fits the read budget (else a
// *LimitError) and numbers only from a sane stored type (else an *Error
// with ErrUnsupportedType).
func (f *File) Attr(path, name string) (Attr, error) {
	lock()
	defer unlock()
	if err := f.readable("read attribute", path, name); err != nil {
		return Attr{}, err
	}
	p, n := cstr(path), cstr(name)
	defer C.free(unsafe.Pointer(p))
	defer C.free(unsafe.Pointer(n))
	var ci C.tv_info
	if rc := C.tv_attr_info(f.ctx, f.id(), p, n, &ci); rc < 0 {
		return Attr{}, f.fail("read attribute", path, name, rc)
	}
	a := Attr{Name: name}
	a.Type, a.Shape = convertInfo(&ci)
	switch a.Type.Class {
	case ClassInt, ClassFloat:
		count, err := f.checkBudget(path, name, a.Shape, 8)
		if err != nil {
			return a, err
		}
		code := C.int(C.TV_T_F64)
		var buf unsafe.Pointer
		if a.Type.Class == ClassInt {
			a.Ints = make([]int64, count+1)
			code, buf = C.TV_T_I64, unsafe.Pointer(&a.Ints[0])
		} else {
			a.Floats = make([]float64, count+1)
			buf = unsafe.Pointer(&a.Floats[0])
		}
		if rc := C.tv_attr_read(f.ctx, f.id(), p, n, code, buf, C.size_t(8*(count+1))); rc < 0 {
			a.Ints, a.Floats = nil, nil
			return a, f.fail("read attribute", path, name, rc)
		}
		if a.Ints != nil {
			a.Ints = a.Ints[:count]
		} else {
			a.Floats = a.Floats[:count]
		}
	case ClassString:
		count, err := f.checkBudget(path, name, a.Shape, 1)
		if err != nil {
			return a, err
		}
		var total C.size_t
		var rc C.int
		s := C.tv_attr_read_strings(f.ctx, f.id(), p, n, C.size_t(f.budget), &total, &rc)
		if s == nil {
			return a, f.fail("read string attribute", path, name, rc)
		}
		a.Strings = unpack(goBytes(unsafe.Pointer(s), total), count)
		C.free(unsafe.Pointer(s))
	}
	return a, nil
}

// checkBudget returns the element count of shape when count*elemSize
// bytes fit the file's read budget; else a *LimitError.
func (f *File) checkBudget(path, name string, s Shape, elemSize int) (int, error) {
	b, ok := s.Bytes(elemSize)
	if !ok {
		return 0, &LimitError{File: f.path, Path: path, Name: name, Shape: s, Overflow: true, Limit: f.budget}
	}
	if b > uint64(f.budget) {
		return 0, &LimitError{File: f.path, Path: path, Name: name, Shape: s, Bytes: b, Limit: f.budget}
	}
	n, _ := s.Elements()
	return int(n), nil
}

// unpack splits n NUL-terminated strings.
func unpack(b []byte, n int) []string {
	out := make([]string, 0, n)
	for len(out) < n {
		i := 0
		for i < len(b) && b[i] != 0 {
			i++
		}
		out = append(out, string(b[:i]))
		if i < len(b) {
			i++
		}
		b = b[i:]
	}
	return out
}

func pack(ss []string) (*C.char, error) {
	var sb strings.Builder
	for _, s := range ss {
		if strings.IndexByte(s, 0) >= 0 {
			return nil, fmt.Errorf("hdf5: string %q contains a NUL byte", s)
		}
		sb.WriteString(s)
		sb.WriteByte(0)
	}
	return C.CString(sb.String()), nil
}

// ErrReadOnly: a write to a file opened for reading.
var ErrReadOnly = errors.New("file is read-only")

func (f *File) checkWritable(op, path string) error {
	if !f.open {
		return &Error{File: f.path, Op: op, Path: path, Err: ErrClosed}
	}
	if !f.writable {
		return &Error{File: f.path, Op: op, Path: path, Err: ErrReadOnly}
	}
	return nil
}

// SetString writes a scalar fixed-length UTF-8 string attribute, replacing
// any existing one; H5MD asks for fixed-length strings.
func (f *File) SetString(path, name, value string) error {
	return f.setStrings(path, name, []string{value}, 0, false)
}

// SetStrings writes a 1-D fixed-length string array attribute.
func (f *File) SetStrings(path, name string, values []string) error {
	return f.setStrings(path, name, values, 1, false)
}

// SetVarString writes a scalar variable-length UTF-8 string attribute,
// the form h5py returns as str (trajfile's writer uses it).
func (f *File) SetVarString(path, name, value string) error {
	return f.setStrings(path, name, []string{value}, 0, true)
}

// SetVarStrings writes a 1-D variable-length UTF-8 string array attribute.
func (f *File) SetVarStrings(path, name string, values []string) error {
	return f.setStrings(path, name, values, 1, true)
}

func (f *File) setStrings(path, name string, values []string, rank int, vlen bool) error {
	lock()
	defer unlock()
	if err := f.checkWritable("write attribute", path); err != nil {
		return err
	}
	packed, err := pack(values)
	if err != nil {
		return err
	}
	defer C.free(unsafe.Pointer(packed))
	p, n := cstr(path), cstr(name)
	defer C.free(unsafe.Pointer(p))
	defer C.free(unsafe.Pointer(n))
	v := C.int(0)
	if vlen {
		v = 1
	}
	if rc := C.tv_attr_write_strings(f.ctx, f.id(), p, n, packed, C.int(len(values)), C.int(rank), v); rc < 0 {
		return f.fail("write string attribute", path, name, rc)
	}
	return nil
}

// SetInts writes an int32 attribute: a scalar when scalar is true (one
// value), else a 1-D array. H5MD's version attributes are int32[2].
func (f *File) SetInts(path, name string, values []int32, scalar bool) error {
	if len(values) == 0 {
		return &Error{File: f.path, Op: "write empty attribute", Path: path, Name: name}
	}
	return f.setNum(path, name, C.TV_T_I32, unsafe.Pointer(&values[0]), len(values), scalar)
}

// SetInt64s writes an int64 attribute (scalar or 1-D).
func (f *File) SetInt64s(path, name string, values []int64, scalar bool) error {
	if len(values) == 0 {
		return &Error{File: f.path, Op: "write empty attribute", Path: path, Name: name}
	}
	return f.setNum(path, name, C.TV_T_I64, unsafe.Pointer(&values[0]), len(values), scalar)
}

// SetFloats writes a float64 attribute (scalar or 1-D).
func (f *File) SetFloats(path, name string, values []float64, scalar bool) error {
	if len(values) == 0 {
		return &Error{File: f.path, Op: "write empty attribute", Path: path, Name: name}
	}
	return f.setNum(path, name, C.TV_T_F64, unsafe.Pointer(&values[0]), len(values), scalar)
}

func (f *File) setNum(path, name string, code C.int, buf unsafe.Pointer, n int, scalar bool) error {
	lock()
	defer unlock()
	if err := f.checkWritable("write attribute", path); err != nil {
		return err
	}
	if scalar && n != 1 {
		return &Error{File: f.path, Op: fmt.Sprintf("write scalar attribute from %d values", n), Path: path, Name: name}
	}
	p, nm := cstr(path), cstr(name)
	defer C.free(unsafe.Pointer(p))
	defer C.free(unsafe.Pointer(nm))
	rank := C.int(1)
	if scalar {
		rank = 0
	}
	dims := [1]C.hsize_t{C.hsize_t(n)}
	if rc := C.tv_attr_write(f.ctx, f.id(), p, nm, code, code, rank, &dims[0], buf); rc < 0 {
		return f.fail("write attribute", path, name, rc)
	}
	return nil
}
