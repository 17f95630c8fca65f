package h5

// #include "shim.h"
import "C"

import (
	"fmt"
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

// Len is the number of elements.
func (s Shape) Len() int {
	if s.Rank < 0 {
		return 0
	}
	n := 1
	for _, d := range s.Dims {
		n *= d
	}
	return n
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
		s.Dims = append(s.Dims, int(ci.dims[i]))
		m := int(ci.maxdims[i])
		if ci.maxdims[i] == C.hsize_t(^uint64(0)) {
			m = Unlimited
		}
		s.MaxDims = append(s.MaxDims, m)
	}
	return t, s
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
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	n := C.tv_nattrs(f.id(), p)
	if n < 0 {
		return nil, &Error{Op: "list attributes of", Path: path}
	}
	names := make([]string, 0, int(n))
	for i := 0; i < int(n); i++ {
		s := C.tv_attr_name(f.id(), p, C.hsize_t(i))
		if s == nil {
			return nil, &Error{Op: "read attribute name on", Path: path}
		}
		names = append(names, C.GoString(s))
		C.free(unsafe.Pointer(s))
	}
	return names, nil
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

// Attr reads attribute name of the object at path.
func (f *File) Attr(path, name string) (Attr, error) {
	lock()
	defer unlock()
	p, n := cstr(path), cstr(name)
	defer C.free(unsafe.Pointer(p))
	defer C.free(unsafe.Pointer(n))
	var ci C.tv_info
	if C.tv_attr_info(f.id(), p, n, &ci) < 0 {
		return Attr{}, &Error{Op: "read attribute", Path: path, Name: name}
	}
	a := Attr{Name: name}
	a.Type, a.Shape = convertInfo(&ci)
	count := a.Shape.Len()
	switch a.Type.Class {
	case ClassInt:
		a.Ints = make([]int64, count+1)
		if C.tv_attr_read(f.id(), p, n, C.TV_T_I64, unsafe.Pointer(&a.Ints[0])) < 0 {
			return a, &Error{Op: "read attribute", Path: path, Name: name}
		}
		a.Ints = a.Ints[:count]
	case ClassFloat:
		a.Floats = make([]float64, count+1)
		if C.tv_attr_read(f.id(), p, n, C.TV_T_F64, unsafe.Pointer(&a.Floats[0])) < 0 {
			return a, &Error{Op: "read attribute", Path: path, Name: name}
		}
		a.Floats = a.Floats[:count]
	case ClassString:
		var total C.size_t
		s := C.tv_attr_read_strings(f.id(), p, n, &total)
		if s == nil {
			return a, &Error{Op: "read string attribute", Path: path, Name: name}
		}
		a.Strings = unpack(C.GoBytes(unsafe.Pointer(s), C.int(total)), count)
		C.free(unsafe.Pointer(s))
	}
	return a, nil
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

func (f *File) checkWritable(op, path string) error {
	if !f.open {
		return &Error{Op: op + " (file closed)", Path: path}
	}
	if !f.writable {
		return &Error{Op: op + " (file is read-only)", Path: path}
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

// SetVarString writes a scalar variable-length string attribute. trajvault's
// own writer does not use it; tests use it to build files as other tools do.
func (f *File) SetVarString(path, name, value string) error {
	return f.setStrings(path, name, []string{value}, 0, true)
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
	if C.tv_attr_write_strings(f.id(), p, n, packed, C.int(len(values)), C.int(rank), v) < 0 {
		return &Error{Op: "write string attribute", Path: path, Name: name}
	}
	return nil
}

// SetInts writes an int32 attribute: a scalar when scalar is true (one
// value), else a 1-D array. H5MD's version attributes are int32[2].
func (f *File) SetInts(path, name string, values []int32, scalar bool) error {
	if len(values) == 0 {
		return &Error{Op: "write empty attribute", Path: path, Name: name}
	}
	return f.setNum(path, name, C.TV_T_I32, unsafe.Pointer(&values[0]), len(values), scalar)
}

// SetInt64s writes an int64 attribute (scalar or 1-D).
func (f *File) SetInt64s(path, name string, values []int64, scalar bool) error {
	if len(values) == 0 {
		return &Error{Op: "write empty attribute", Path: path, Name: name}
	}
	return f.setNum(path, name, C.TV_T_I64, unsafe.Pointer(&values[0]), len(values), scalar)
}

// SetFloats writes a float64 attribute (scalar or 1-D).
func (f *File) SetFloats(path, name string, values []float64, scalar bool) error {
	if len(values) == 0 {
		return &Error{Op: "write empty attribute", Path: path, Name: name}
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
		return &Error{Op: fmt.Sprintf("write scalar attribute from %d values", n), Path: path, Name: name}
	}
	p, nm := cstr(path), cstr(name)
	defer C.free(unsafe.Pointer(p))
	defer C.free(unsafe.Pointer(nm))
	rank := C.int(1)
	if scalar {
		rank = 0
	}
	dims := [1]C.hsize_t{C.hsize_t(n)}
	if C.tv_attr_write(f.id(), p, nm, code, code, rank, &dims[0], buf) < 0 {
		return &Error{Op: "write attribute", Path: path, Name: name}
	}
	return nil
}
