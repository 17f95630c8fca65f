package ingest

import (
	"errors"
	"fmt"
)

// ParseError is a problem at a place in a text file. Line and Column count
// from 1; Column is 0 when the whole line is at fault.
type ParseError struct {
	File   string
	Line   int
	Column int
	Err    error
}

func (e *ParseError) Error() string {
	if e.Column > 0 {
		return fmt.Sprintf("%s:%d:%d: %v", e.File, e.Line, e.Column, e.Err)
	}
	return fmt.Sprintf("%s:%d: %v", e.File, e.Line, e.Err)
}

func (e *ParseError) Unwrap() error { return e.Err }

// Causes of ParseErrors, for errors.Is.
var (
	ErrTruncated  = errors.New("file ends inside a record (the writing job was probably killed)")
	ErrFieldCount = errors.New("wrong number of fields")
	ErrNumber     = errors.New("not a number")
	ErrHeader     = errors.New("bad header")
	ErrAtomCount  = errors.New("atom count changes")
)

// detail wraps a cause with what was expected and found.
func detail(cause error, format string, args ...any) error {
	return fmt.Errorf("%w: %s", cause, fmt.Sprintf(format, args...))
}
