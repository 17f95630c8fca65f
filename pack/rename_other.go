//go:build !linux

package pack

import (
	"errors"
	"os"
)

var errNoExchange = errors.New("atomic exchange not supported")

func renameExchange(a, b string) error { return errNoExchange }

func renameNoReplace(from, to string) error {
	if _, err := os.Lstat(to); err == nil {
		return &os.LinkError{Op: "rename", Old: from, New: to, Err: os.ErrExist}
	}
	return os.Rename(from, to)
}
