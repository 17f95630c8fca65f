package h5

// #include "shim.h"
import "C"

import (
	"unsafe"

	"gonum.org/v1/hdf5"
)

// OpenRW opens an existing file for modification. trajvault's commands
// never modify inputs; tests use it to build fixtures that break one rule.
func OpenRW(path string) (*File, error) {
	if err := sniff(path); err != nil {
		return nil, &OpenError{File: path, Err: err}
	}
	lock()
	defer unlock()
	f, err := hdf5.OpenFile(path, hdf5.F_ACC_RDWR)
	if err != nil {
		return nil, &OpenError{File: path, Err: ErrDamaged}
	}
	return &File{f: f, path: path, writable: true, open: true}, nil
}

// Delete removes the link at path (the object goes when its last link does).
func (f *File) Delete(path string) error {
	lock()
	defer unlock()
	if err := f.checkWritable("delete", path); err != nil {
		return err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	if C.tv_delete_link(f.id(), p) < 0 {
		return &Error{Op: "delete", Path: path}
	}
	return nil
}

// DeleteAttr removes attribute name from the object at path.
func (f *File) DeleteAttr(path, name string) error {
	lock()
	defer unlock()
	if err := f.checkWritable("delete attribute", path); err != nil {
		return err
	}
	p, n := cstr(path), cstr(name)
	defer C.free(unsafe.Pointer(p))
	defer C.free(unsafe.Pointer(n))
	if C.tv_delete_attr(f.id(), p, n) < 0 {
		return &Error{Op: "delete attribute", Path: path, Name: name}
	}
	return nil
}
