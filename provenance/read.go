package provenance

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"

	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
)

// Causes of an Error.
var (
	// ErrMissing: the file carries no record.
	ErrMissing = errors.New("no provenance record")
	// ErrSyntax: the record is not one JSON object.
	ErrSyntax = errors.New("not a JSON object")
	// ErrType: a field has the wrong JSON type.
	ErrType = errors.New("wrong type")
	// ErrStorage: the attribute holding the record is not one string.
	ErrStorage = errors.New("not a scalar string attribute")
)

// Error says why a stored record cannot be read. Offset counts bytes of
// the JSON text from 0; it is -1 when unknown.
type Error struct {
	File   string
	Field  string // the JSON field at fault; "" for the whole record
	Offset int64
	Err    error // ErrMissing, ErrSyntax, ErrType or ErrStorage
	Detail string
}

func (e *Error) Error() string {
	s := e.File
	if s != "" {
		s += ": "
	}
	s += trajfile.ParametersGroup + "@" + trajfile.ProvenanceAttr + ": "
	if e.Field != "" {
		s += "field " + e.Field + ": "
	}
	s += e.Err.Error()
	if e.Offset >= 0 {
		s += fmt.Sprintf(" at byte %d", e.Offset)
	}
	if e.Detail != "" {
		s += " (" + e.Detail + ")"
	}
	return s
}

func (e *Error) Unwrap() error { return e.Err }

// Parse reads a record written by Record.JSON. Fields it does not know
// are ignored (a newer writer may add some); a known field of the wrong
// type, text that is not one JSON object, or trailing data is an *Error.
func Parse(b []byte) (*Record, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	var r Record
	if t := bytes.TrimSpace(b); len(t) == 0 || t[0] != '{' {
		return nil, &Error{Offset: -1, Err: ErrSyntax, Detail: "expected an object starting with {"}
	}
	if err := dec.Decode(&r); err != nil {
		var se *json.SyntaxError
		var te *json.UnmarshalTypeError
		switch {
		case errors.As(err, &se):
			return nil, &Error{Offset: se.Offset, Err: ErrSyntax, Detail: se.Error()}
		case errors.As(err, &te):
			return nil, &Error{Field: te.Field, Offset: te.Offset, Err: ErrType, Detail: "expected " + te.Type.String() + ", found " + te.Value}
		case errors.Is(err, io.ErrUnexpectedEOF):
			return nil, &Error{Offset: int64(len(b)), Err: ErrSyntax, Detail: "the text is cut off"}
		}
		return nil, &Error{Offset: -1, Err: ErrSyntax, Detail: err.Error()}
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, &Error{Offset: dec.InputOffset(), Err: ErrSyntax, Detail: "data after the record"}
	}
	return &r, nil
}

// Read returns the record stored in f (/parameters@trajvault_provenance);
// name is the file's name for errors. A file without one gives an *Error
// with ErrMissing.
func Read(f *h5.File, name string) (*Record, error) {
	if f.Kind(trajfile.ParametersGroup) != h5.Group || !f.HasAttr(trajfile.ParametersGroup, trajfile.ProvenanceAttr) {
		return nil, &Error{File: name, Offset: -1, Err: ErrMissing}
	}
	a, err := f.Attr(trajfile.ParametersGroup, trajfile.ProvenanceAttr)
	if err != nil {
		return nil, &Error{File: name, Offset: -1, Err: ErrStorage, Detail: err.Error()}
	}
	if a.Type.Class != h5.ClassString || len(a.Strings) != 1 {
		return nil, &Error{File: name, Offset: -1, Err: ErrStorage, Detail: fmt.Sprintf("found %s %s", a.Type, a.Shape)}
	}
	r, err := Parse([]byte(a.Strings[0]))
	if e, ok := err.(*Error); ok {
		e.File = name
	}
	return r, err
}

// ValidSHA256 reports whether s has the form of a SHA-256 digest as
// recorded: 64 lowercase hexadecimal digits (FIPS 180-4: 256 bits).
func ValidSHA256(s string) bool {
	if len(s) != 64 {
		return false
	}
	for i := 0; i < len(s); i++ {
		if !('0' <= s[i] && s[i] <= '9' || 'a' <= s[i] && s[i] <= 'f') {
			return false
		}
	}
	return true
}
