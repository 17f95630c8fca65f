// Package testenv locates what tests need outside the Go code: the
// repository's testdata and Debian's python3, which sees python3-h5py and
// python3-ase (a python3 earlier on PATH, e.g. from pyenv, may not).
package testenv

import (
	"os"
	"path/filepath"
	"runtime"
)

// Python is the interpreter for the independent-reader tests:
// $TRAJVAULT_PYTHON, else /usr/bin/python3.
func Python() string {
	if p := os.Getenv("TRAJVAULT_PYTHON"); p != "" {
		return p
	}
	return "/usr/bin/python3"
}

// Repo joins parts to the repository root.
func Repo(parts ...string) string {
	_, self, _, _ := runtime.Caller(0)
	return filepath.Join(append([]string{filepath.Dir(self), "..", ".."}, parts...)...)
}
