package ingest

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"regexp"
	"strings"

	"trajvault/internal/finding"
	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
	"trajvault/provenance"
)

// TableColumn describes one column of a table.
type TableColumn struct {
	Name     string // as in the header
	Unit     string // from the header ("time[fs]", "time(fs)"), or ""
	Quantity string // layout quantity from the vocabulary, or "" if unmapped
	State    int    // state index for per-state quantities, else -1
	Format   textnum.Format
	seen     bool
	raw      textnum.Format // the last value's format (Column.mergeRaw)
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
	// HeaderLine is the line (from 1) of the header naming the columns.
	HeaderLine int
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
	t.HeaderLine = line
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
		q, k := quantity.Column(name)
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
	// Views into the line: each field is parsed at once, none is kept.
	t.fields = splitView(b, t.sep, t.fields)
	if len(t.fields) != len(t.Columns) {
		col := len(b) + 1
		if len(t.fields) > len(t.Columns) {
			col = t.fields[len(t.Columns)].col
		} else if t.lr.atEOF() && t.pending == nil {
			return line, &ParseError{File: t.file, Line: line, Column: col, Err: detail(ErrTruncated, "the last row has %d of %d fields", len(t.fields), len(t.Columns))}
		}
		return line, &ParseError{File: t.file, Line: line, Column: col, Err: detail(ErrFieldCount, "expected %d fields (%s), found %d; a short last line usually means the file was cut", len(t.Columns), t.names(), len(t.fields))}
	}
	var fm textnum.Format
	for i, f := range t.fields {
		c := t.Columns[i]
		v, err := textnum.ParseShortTo(f.text, !c.seen || c.Format.MayBeShortest(), &fm)
		if err != nil {
			cause := ErrNumber
			if nonFinite(f.text) {
				cause = ErrNonFinite
			}
			return line, &ParseError{File: t.file, Line: line, Column: f.col, Err: detail(cause, "column %s: expected a number, found %q", t.Columns[i].Name, f.text)}
		}
		dst[i] = v
		switch {
		case !c.seen:
			c.Format, c.raw, c.seen = fm, fm, true
		case fm != c.raw: // else Merge would change nothing (Column.mergeRaw)
			c.Format, c.raw = c.Format.Merge(fm), fm
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

// tableFormat reads column tables. A file found by extension that is not
// a table (no header naming its columns) is skipped with a note.
var tableFormat = Reader{
	Kind: KindTable, Role: RoleRecords, Fallback: true, ProvenanceRole: "table",
	Extensions: []string{".dat", ".csv", ".tsv", ".txt", ".tab", ".ene"},
	Probe: func(path string) error {
		f, err := os.Open(path)
		if err != nil {
			return err
		}
		defer f.Close()
		_, err = NewTableReader(f, path)
		return err
	},
	Open: func(path string, spec any, _ *Recipe) (source, error) {
		ts, _ := spec.(*TableSpec)
		return openTable(path, ts)
	},
}

type tableSource struct {
	path  string
	f     *hashedFile // hashed as read (digest)
	t     *TableReader
	row   []float64
	quant []string
	state []int
	unit  map[string]string
	// unitAt says where each unit of unit is written (unitWhere).
	unitAt map[string]string
	notes
}

func openTable(path string, spec *TableSpec) (*tableSource, error) {
	f, err := openHashed(path)
	if err != nil {
		return nil, err
	}
	t, err := NewTableReader(f, path)
	if err != nil {
		f.Close()
		return nil, err
	}
	s := &tableSource{path: path, f: f, t: t, row: make([]float64, len(t.Columns)), unit: map[string]string{}, unitAt: map[string]string{}}
	for _, c := range t.Columns {
		q, k := c.Quantity, c.State
		mapped := false
		if spec != nil {
			if m, ok := spec.Columns[c.Name]; ok {
				q, k, _ = quantity.Recipe(m)
				mapped = true
			}
		}
		switch {
		case q == quantity.Ignore:
			s.add("col:"+c.Name, sourceNote{code: PNotStored, sev: finding.Note,
				msg: fmt.Sprintf("column %s is ignored by the recipe; it is not stored", c.Name), notStored: fmt.Sprintf("column %s: ignored by the recipe", c.Name)})
			q = ""
		case q == "":
			s.add("col:"+c.Name, sourceNote{code: PNotStored, sev: finding.Note,
				msg:       fmt.Sprintf("column %s is not a quantity trajvault knows (%s); it is not stored (map it in a recipe: tables: - columns: {%s: QUANTITY})", c.Name, quantity.Names(), c.Name),
				notStored: fmt.Sprintf("column %s: not a known quantity", c.Name)})
		case !mapped && quantity.Ambiguous(c.Name) != nil:
			a := quantity.Ambiguous(c.Name)
			s.add("ambiguous:"+c.Name, sourceNote{code: PAmbiguous, sev: finding.Note, quantity: q,
				msg: fmt.Sprintf("column %s read as %s (the convention of energy tables); as an %s it would mean %s. If it is not the %s, say which it is in a recipe: tables: - columns: {%s: %s}",
					c.Name, q, a[1].Source, a[1].Quantity, q, c.Name, a[1].Quantity)})
		}
		c.Quantity, c.State = q, k
		s.quant = append(s.quant, q)
		s.state = append(s.state, k)
		if kind := string(quantity.UnitKind(q)); c.Unit != "" && kind != "" {
			if old, ok := s.unit[kind]; ok && old != c.Unit {
				f.Close()
				return nil, &ParseError{File: path, Line: 1, Err: detail(ErrHeader, "columns of %s are in %q and %q; trajvault stores numbers as printed, so one unit per kind of quantity", kind, old, c.Unit)}
			}
			s.unit[kind] = c.Unit
			if _, ok := s.unitAt[kind]; !ok {
				s.unitAt[kind] = fmt.Sprintf("%s:%d (header column %s[%s])", path, t.HeaderLine, c.Name, c.Unit)
			}
		}
	}
	return s, nil
}

func (s *tableSource) file() string                      { return s.path }
func (s *tableSource) units() map[string]string          { return s.unit }
func (s *tableSource) unitWhere(kind string) string      { return s.unitAt[kind] }
func (s *tableSource) hops() []hop                       { return nil }
func (s *tableSource) close()                            { s.f.Close() }
func (s *tableSource) digest() (provenance.Source, bool) { return s.f.sum(s.path) }

func (s *tableSource) timeFormat() textnum.Format {
	var f textnum.Format
	seen := false
	for i, q := range s.quant {
		if q == quantity.TimeQ && s.t.Columns[i].seen {
			if seen {
				f = f.Merge(s.t.Columns[i].Format)
			} else {
				f, seen = s.t.Columns[i].Format, true
			}
		}
	}
	return f
}

func (s *tableSource) provides() map[string]textnum.Format {
	out := map[string]textnum.Format{}
	for i, c := range s.t.Columns {
		q := s.quant[i]
		if q == "" || !c.seen {
			continue
		}
		if old, ok := out[q]; ok {
			out[q] = old.Merge(c.Format)
		} else {
			out[q] = c.Format
		}
	}
	return out
}

func (s *tableSource) next() (*record, error) {
	line, err := s.t.Next(s.row)
	if err != nil {
		return nil, err
	}
	rec := &record{line: line}
	for i, v := range s.row {
		switch q := s.quant[i]; q {
		case "":
		case quantity.Step:
			rec.step, rec.hasStep = int64(v), true
		case quantity.TimeQ:
			rec.time, rec.hasTime = v, true
		case quantity.ActiveState:
			rec.active, rec.hasActive = int(v), true
		case quantity.StateEnergy:
			rec.stateE = setState(rec.stateE, s.state[i], v)
		case quantity.Population:
			rec.pop = setState(rec.pop, s.state[i], v)
		default:
			if k := quantity.ScalarIndex(q); k >= 0 {
				rec.scalar[k], rec.hasScalar[k] = v, true
			}
		}
	}
	return rec, nil
}
