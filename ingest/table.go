package ingest

import (
	"bytes"
	"fmt"
	"io"
	"regexp"
	"strings"

	"trajvault/internal/textnum"
)

// TableColumn describes one column of a table.
type TableColumn struct {
	Name     string // as in the header
	Unit     string // from the header ("time[fs]", "time(fs)"), or ""
	Quantity string // layout quantity from the vocabulary, or "" if unmapped
	State    int    // state index for per-state quantities, else -1
	Format   textnum.Format
	seen     bool
}

// TableReader reads a column table one row at a time: whitespace-, comma-
// or tab-separated, a header line naming the columns (optionally commented
// with # or !), comment lines, CRLF line ends and a UTF-8 byte-order mark.
type TableReader struct {
	file    string
	lr      *lineReader
	sep     byte
	Columns []*TableColumn
	fields  []field
	pending []byte // first data line, read while looking for the header
	pendLn  int
	rows    int
}

var unitInHeader = regexp.MustCompile(`^(.+?)\s*[\[(]([^\])]*)[\])]$`)

// NewTableReader reads the header of a table from r; file names the input
// in errors.
func NewTableReader(r io.Reader, file string) (*TableReader, error) {
	t := &TableReader{file: file, lr: newLineReader(r)}
	var lastComment []byte
	lastCommentLine := 0
	for {
		b, err := t.lr.next()
		if err == io.EOF {
			return nil, &ParseError{File: file, Line: max(t.lr.line, 1), Err: detail(ErrHeader, "no data rows")}
		} else if err != nil {
			return nil, err
		}
		s := bytes.TrimSpace(b)
		if len(s) == 0 {
			continue
		}
		if s[0] == '#' || s[0] == '!' {
			lastComment = append(lastComment[:0], bytes.TrimSpace(s[1:])...)
			lastCommentLine = t.lr.line
			continue
		}
		t.sep = detectSep(b)
		fs := splitFields(b, t.sep, nil)
		if !allNumbers(fs) {
			if err := t.header(b, t.lr.line); err != nil {
				return nil, err
			}
			continue
		}
		if t.Columns == nil {
			if lastComment == nil {
				return nil, &ParseError{File: file, Line: t.lr.line, Err: detail(ErrHeader, "no header line naming the columns; add one (e.g. \"# step time[fs] Epot[hartree]\") or describe the file in a recipe")}
			}
			if err := t.header(lastComment, lastCommentLine); err != nil {
				return nil, err
			}
		}
		if len(fs) != len(t.Columns) {
			return nil, &ParseError{File: file, Line: t.lr.line, Err: detail(ErrFieldCount, "the header names %d columns but the first row has %d fields", len(t.Columns), len(fs))}
		}
		t.pending = append([]byte(nil), b...)
		t.pendLn = t.lr.line
		return t, nil
	}
}

func detectSep(b []byte) byte {
	switch {
	case bytes.IndexByte(b, ',') >= 0:
		return ','
	case bytes.IndexByte(b, '\t') >= 0 && bytes.IndexByte(bytes.TrimSpace(b), ' ') < 0:
		return '\t'
	}
	return 0
}

func allNumbers(fs []field) bool {
	for _, f := range fs {
		if _, _, err := textnum.Parse(f.text); err != nil {
			return false
		}
	}
	return len(fs) > 0
}

func (t *TableReader) header(b []byte, line int) error {
	if t.sep == 0 {
		t.sep = detectSep(b)
	}
	fs := splitFields(b, t.sep, nil)
	t.Columns = t.Columns[:0]
	seen := map[string]int{}
	for _, f := range fs {
		name, unit := f.text, ""
		if m := unitInHeader.FindStringSubmatch(f.text); m != nil {
			name, unit = m[1], m[2]
		}
		if prev, dup := seen[name]; dup {
			return &ParseError{File: t.file, Line: line, Column: f.col, Err: detail(ErrHeader, "column %q repeats column %d; give columns distinct names", name, prev+1)}
		}
		seen[name] = len(t.Columns)
		q, k := Vocabulary(name)
		t.Columns = append(t.Columns, &TableColumn{Name: name, Unit: unit, Quantity: q, State: k})
	}
	return nil
}

// Next reads one data row into dst (len(dst) == len(Columns)) and returns
// the row's line number, or io.EOF at the end.
func (t *TableReader) Next(dst []float64) (int, error) {
	var b []byte
	var line int
	if t.pending != nil {
		b, line, t.pending = t.pending, t.pendLn, nil
	} else {
		for {
			var err error
			b, err = t.lr.next()
			if err != nil {
				return 0, err
			}
			line = t.lr.line
			s := bytes.TrimSpace(b)
			if len(s) == 0 || s[0] == '#' || s[0] == '!' {
				continue
			}
			break
		}
	}
	t.fields = splitFields(b, t.sep, t.fields)
	if len(t.fields) != len(t.Columns) {
		col := len(b) + 1
		if len(t.fields) > len(t.Columns) {
			col = t.fields[len(t.Columns)].col
		} else if t.lr.atEOF() && t.pending == nil {
			return line, &ParseError{File: t.file, Line: line, Column: col, Err: detail(ErrTruncated, "the last row has %d of %d fields", len(t.fields), len(t.Columns))}
		}
		return line, &ParseError{File: t.file, Line: line, Column: col, Err: detail(ErrFieldCount, "expected %d fields (%s), found %d; a short last line usually means the file was cut", len(t.Columns), t.names(), len(t.fields))}
	}
	for i, f := range t.fields {
		v, fm, err := textnum.Parse(f.text)
		if err != nil {
			cause := ErrNumber
			if nonFinite(f.text) {
				cause = ErrNonFinite
			}
			return line, &ParseError{File: t.file, Line: line, Column: f.col, Err: detail(cause, "column %s: expected a number, found %q", t.Columns[i].Name, f.text)}
		}
		dst[i] = v
		c := t.Columns[i]
		if !c.seen {
			c.Format, c.seen = fm, true
		} else {
			c.Format = c.Format.Merge(fm)
		}
	}
	t.rows++
	return line, nil
}

func (t *TableReader) names() string {
	var n []string
	for _, c := range t.Columns {
		n = append(n, c.Name)
	}
	return strings.Join(n, " ")
}

// Vocabulary maps a column name to a layout quantity and, for per-state
// quantities, a state index as written (not yet shifted to 0-based). The
// table is documented in README.md; names are compared case-insensitively
// with '_', '-' and spaces removed.
func Vocabulary(name string) (string, int) {
	n := strings.ToLower(nameNoise.Replace(name))
	switch n {
	case "step", "nstep", "istep", "steps":
		return "step", -1
	case "time", "t", "simtime":
		return "time", -1
	case "ekin", "kinetic", "kineticenergy", "ke", "ek":
		return "kinetic_energy", -1
	case "epot", "potential", "potentialenergy", "pe", "ep":
		return "potential_energy", -1
	case "etot", "total", "totalenergy", "energy", "e", "etotal":
		return "total_energy", -1
	case "state", "activestate", "surface", "istate", "currentstate", "active":
		return "active_state", -1
	}
	if m := stateCol.FindStringSubmatch(n); m != nil {
		var k int
		fmt.Sscan(m[2], &k)
		switch m[1] {
		case "e", "en", "energy", "v", "es", "estate":
			return "state_energy", k
		case "p", "pop", "population", "rho":
			return "population", k
		}
	}
	return "", -1
}

var nameNoise = strings.NewReplacer("_", "", "-", "", " ", "", ".", "")

var stateCol = regexp.MustCompile(`^([a-z]+?)s?(\d+)$`)
