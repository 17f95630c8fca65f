package h5

// #include "shim.h"
import "C"

import "unsafe"

// Delete removes the link at path (the object goes when its last link does).
func (f *File) Delete(path string) error {
	lock()
	defer unlock()
	if err := f.checkWritable("delete", path); err != nil {
		return err
	}
	p := cstr(path)
	defer C.free(unsafe.Pointer(p))
	if rc := C.tv_delete_link(f.ctx, f.id(), p); rc < 0 {
		return f.fail("delete", path, "", rc)
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
	if rc := C.tv_delete_attr(f.ctx, f.id(), p, n); rc < 0 {
		return f.fail("delete attribute", path, name, rc)
	}
	return nil
}
