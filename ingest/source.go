package ingest

import (
	"errors"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"

	"trajvault/internal/textnum"
)

// ErrNonFinite marks a NaN or Inf printed in a log.
var ErrNonFinite = errors.New("not a finite number (NaN or Inf): the run diverged or the log is corrupt")

func nonFinite(s string) bool {
	l := strings.ToLower(strings.TrimLeft(s, "+-"))
	return strings.HasPrefix(l, "nan") || strings.HasPrefix(l, "inf")
}

// record is one time point read from one source. Per-state slices are
// indexed by state as written in the log (shifted later by state_base).
type record struct {
	line      int
	step      int64
	hasStep   bool
	time      float64
	hasTime   bool
	scalar    [3]float64 // kinetic, potential, total energy
	hasScalar [3]bool
	stateE    []float64
	pop       []float64
	active    int
	hasActive bool
	frame     *Frame
}

var scalarNames = [3]string{"kinetic_energy", "potential_energy", "total_energy"}

func scalarIndex(q string) int {
	for i, n := range scalarNames {
		if n == q {
			return i
		}
	}
	return -1
}

func setState(s []float64, k int, v float64) []float64 {
	for len(s) <= k {
		s = append(s, math.NaN())
	}
	s[k] = v
	return s
}

// hop is one hop attempt read from a log.
type hop struct {
	line       int
	step       int64
	hasStep    bool
	from, to   int
	frustrated bool
}

// source yields the records of one file in file order.
type source interface {
	file() string
	next() (*record, error) // io.EOF at the end
	// formats are the printed formats per quantity seen so far.
	formats() map[string]textnum.Format
	// timeFormat is the printed format of the time so far, cheaply (it
	// is consulted for every record).
	timeFormat() textnum.Format
	// units are the units per quantity the file itself declares.
	units() map[string]string
	hops() []hop
	close()
}

// ---------------------------------------------------------------- XYZ

type xyzSource struct {
	path    string
	f       *os.File
	r       *XYZReader
	recipe  *Recipe
	fmts    map[string]textnum.Format
	columns map[string]string
}

func openXYZ(path string, rc *Recipe) (*xyzSource, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	s := &xyzSource{path: path, f: f, r: NewXYZReader(f, path), recipe: rc, fmts: map[string]textnum.Format{}, columns: map[string]string{}}
	if rc != nil && rc.Geometry != nil {
		for k, v := range rc.Geometry.Columns {
			s.columns[k] = v
		}
	}
	return s, nil
}

func (s *xyzSource) file() string                       { return s.path }
func (s *xyzSource) formats() map[string]textnum.Format { return s.fmts }
func (s *xyzSource) timeFormat() textnum.Format         { return s.fmts["time"] }
func (s *xyzSource) units() map[string]string           { return nil }
func (s *xyzSource) hops() []hop                        { return nil }
func (s *xyzSource) close()                             { s.f.Close() }

// columnQuantity maps extended XYZ property names to quantities
// (vocabulary documented in README.md).
func (s *xyzSource) columnQuantity(name string) string {
	if q, ok := s.columns[name]; ok {
		return q
	}
	switch strings.ToLower(name) {
	case "pos", "positions", "position":
		return "position"
	case "velo", "vel", "velocity", "velocities":
		return "velocity"
	case "force", "forces", "frc":
		return "force"
	case "momenta", "momentum":
		return "momentum"
	case "mass", "masses":
		return "mass"
	}
	return ""
}

func (s *xyzSource) merge(q string, f textnum.Format) {
	if old, ok := s.fmts[q]; ok {
		s.fmts[q] = old.Merge(f)
	} else {
		s.fmts[q] = f
	}
}

func (s *xyzSource) next() (*record, error) {
	fr, err := s.r.Next()
	if err != nil {
		return nil, err
	}
	rec := &record{line: fr.Line, frame: fr}
	for _, c := range fr.Columns {
		if q := s.columnQuantity(c.Name); q != "" {
			s.merge(q, c.Format)
		}
	}
	// Step, time and energies from the comment line: extended XYZ keys,
	// then the recipe's patterns.
	set := func(key, val string, col int) error {
		q, _ := Vocabulary(key)
		if strings.EqualFold(key, "energy") {
			q = "potential_energy"
		}
		if q == "" {
			return nil
		}
		v, fm, err := textnum.Parse(val)
		if err != nil {
			cause := ErrNumber
			if nonFinite(val) {
				cause = ErrNonFinite
			}
			return &ParseError{File: s.path, Line: fr.Line + 1, Column: col, Err: detail(cause, "%s: expected a number, found %q", key, val)}
		}
		switch q {
		case "step":
			if fm.Decimals != 0 || fm.Exp {
				return &ParseError{File: s.path, Line: fr.Line + 1, Column: col, Err: detail(ErrNumber, "step: expected an integer, found %q", val)}
			}
			rec.step, rec.hasStep = int64(v), true
		case "time":
			rec.time, rec.hasTime = v, true
			s.merge("time", fm)
		default:
			if i := scalarIndex(q); i >= 0 {
				rec.scalar[i], rec.hasScalar[i] = v, true
				s.merge(q, fm)
			}
		}
		return nil
	}
	for _, k := range sortedInfoKeys(fr.Info) {
		if err := set(k, fr.Info[k], strings.Index(fr.Comment, k+"=")+len(k)+2); err != nil {
			return nil, err
		}
	}
	if s.recipe != nil {
		for _, re := range s.recipe.comment {
			m := re.FindStringSubmatchIndex(fr.Comment)
			if m == nil {
				continue
			}
			for gi, name := range re.SubexpNames() {
				if name == "" || m[2*gi] < 0 {
					continue
				}
				if err := set(name, fr.Comment[m[2*gi]:m[2*gi+1]], m[2*gi]+1); err != nil {
					return nil, err
				}
			}
		}
	}
	return rec, nil
}

func sortedInfoKeys(m map[string]string) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		if k != "Properties" && k != "Lattice" && k != "pbc" {
			keys = append(keys, k)
		}
	}
	sort.Strings(keys)
	return keys
}

// ---------------------------------------------------------------- tables

type tableSource struct {
	path  string
	f     *os.File
	t     *TableReader
	row   []float64
	quant []string
	state []int
	unit  map[string]string
}

func openTable(path string, spec *TableSpec) (*tableSource, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	t, err := NewTableReader(f, path)
	if err != nil {
		f.Close()
		return nil, err
	}
	s := &tableSource{path: path, f: f, t: t, row: make([]float64, len(t.Columns)), unit: map[string]string{}}
	for _, c := range t.Columns {
		q, k := c.Quantity, c.State
		if spec != nil {
			if m, ok := spec.Columns[c.Name]; ok {
				q, k, _ = parseQuantity(m)
			}
		}
		if q == "ignore" {
			q = ""
		}
		c.Quantity, c.State = q, k
		s.quant = append(s.quant, q)
		s.state = append(s.state, k)
		if c.Unit != "" && q != "" && q != "step" && q != "active_state" && q != "population" {
			kind := unitKind(q)
			if old, ok := s.unit[kind]; ok && old != c.Unit {
				f.Close()
				return nil, &ParseError{File: path, Line: 1, Err: detail(ErrHeader, "columns of %s are in %q and %q; trajvault stores numbers as printed, so one unit per kind of quantity", kind, old, c.Unit)}
			}
			s.unit[kind] = c.Unit
		}
	}
	return s, nil
}

// unitKind is the unit class of a quantity.
func unitKind(q string) string {
	switch q {
	case "kinetic_energy", "potential_energy", "total_energy", "state_energy":
		return "energy"
	}
	return q
}

func (s *tableSource) file() string             { return s.path }
func (s *tableSource) units() map[string]string { return s.unit }
func (s *tableSource) hops() []hop              { return nil }
func (s *tableSource) close()                   { s.f.Close() }

func (s *tableSource) timeFormat() textnum.Format {
	var f textnum.Format
	for i, q := range s.quant {
		if q == "time" {
			f = f.Merge(s.t.Columns[i].Format)
		}
	}
	return f
}

func (s *tableSource) formats() map[string]textnum.Format {
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
		case "step":
			rec.step, rec.hasStep = int64(v), true
		case "time":
			rec.time, rec.hasTime = v, true
		case "active_state":
			rec.active, rec.hasActive = int(v), true
		case "state_energy":
			rec.stateE = setState(rec.stateE, s.state[i], v)
		case "population":
			rec.pop = setState(rec.pop, s.state[i], v)
		default:
			if k := scalarIndex(q); k >= 0 {
				rec.scalar[k], rec.hasScalar[k] = v, true
			}
		}
	}
	return rec, nil
}

// ---------------------------------------------------------------- logs

type logSource struct {
	path  string
	f     *os.File
	lr    *lineReader
	spec  *LogSpec
	cur   *record
	fmts  map[string]textnum.Format
	hopsL []hop
	done  bool
}

func openLog(path string, spec *LogSpec) (*logSource, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	return &logSource{path: path, f: f, lr: newLineReader(f), spec: spec, fmts: map[string]textnum.Format{}}, nil
}

func (s *logSource) file() string                       { return s.path }
func (s *logSource) formats() map[string]textnum.Format { return s.fmts }
func (s *logSource) timeFormat() textnum.Format         { return s.fmts["time"] }
func (s *logSource) units() map[string]string           { return nil }
func (s *logSource) hops() []hop                        { return s.hopsL }
func (s *logSource) close()                             { s.f.Close() }

func (s *logSource) merge(q string, f textnum.Format) {
	if old, ok := s.fmts[q]; ok {
		s.fmts[q] = old.Merge(f)
	} else {
		s.fmts[q] = f
	}
}

// next returns the record completed by the next "step" match, or the
// last record at the end of the file.
func (s *logSource) next() (*record, error) {
	if s.done {
		return nil, io.EOF
	}
	for {
		b, err := s.lr.next()
		if err == io.EOF {
			s.done = true
			if s.cur != nil {
				r := s.cur
				s.cur = nil
				return r, nil
			}
			return nil, io.EOF
		} else if err != nil {
			return nil, err
		}
		line := string(b)
		for _, rule := range s.spec.Rules {
			m := rule.re.FindStringSubmatchIndex(line)
			if m == nil {
				continue
			}
			out, err := s.apply(rule, line, m)
			if err != nil {
				return nil, err
			}
			if out != nil {
				return out, nil
			}
		}
	}
}

func (s *logSource) apply(rule Rule, line string, m []int) (*record, error) {
	names := rule.re.SubexpNames()
	get := func(name string) (string, int, bool) {
		for i, n := range names {
			if n == name && m[2*i] >= 0 {
				return line[m[2*i]:m[2*i+1]], m[2*i] + 1, true
			}
		}
		return "", 0, false
	}
	num := func(name string) (float64, textnum.Format, bool, error) {
		txt, col, ok := get(name)
		if !ok {
			return 0, textnum.Format{}, false, nil
		}
		v, fm, err := textnum.Parse(txt)
		if err != nil {
			cause := ErrNumber
			if nonFinite(txt) {
				cause = ErrNonFinite
			}
			return 0, fm, false, &ParseError{File: s.path, Line: s.lr.line, Column: col, Err: detail(cause, "group %s: expected a number, found %q", name, txt)}
		}
		return v, fm, true, nil
	}
	integer := func(name string) (int64, bool, error) {
		v, fm, ok, err := num(name)
		if err != nil || !ok {
			return 0, ok, err
		}
		if fm.Decimals != 0 || fm.Exp {
			_, col, _ := get(name)
			return 0, false, &ParseError{File: s.path, Line: s.lr.line, Column: col, Err: detail(ErrNumber, "group %s: expected an integer", name)}
		}
		return int64(v), true, nil
	}
	if rule.Event == "hop" {
		h := hop{line: s.lr.line}
		from, ok1, err := integer("hop_from")
		if err != nil {
			return nil, err
		}
		to, ok2, err := integer("hop_to")
		if err != nil {
			return nil, err
		}
		kind, _, ok3 := get("hop_kind")
		if !ok1 || !ok2 || !ok3 {
			return nil, &ParseError{File: s.path, Line: s.lr.line, Err: detail(ErrHeader, "hop rule matched without hop_from, hop_to and hop_kind groups")}
		}
		switch strings.ToLower(kind) {
		case "accepted", "accept", "yes", "1", "true":
		case "frustrated", "rejected", "no", "0", "false":
			h.frustrated = true
		default:
			_, col, _ := get("hop_kind")
			return nil, &ParseError{File: s.path, Line: s.lr.line, Column: col, Err: detail(ErrNumber, "hop_kind %q: expected accepted or frustrated", kind)}
		}
		h.from, h.to = int(from), int(to)
		if st, ok, err := integer("step"); err != nil {
			return nil, err
		} else if ok {
			h.step, h.hasStep = st, true
		} else if s.cur != nil && s.cur.hasStep {
			h.step, h.hasStep = s.cur.step, true
		}
		s.hopsL = append(s.hopsL, h)
		return nil, nil
	}
	var done *record
	if st, ok, err := integer("step"); err != nil {
		return nil, err
	} else if ok {
		if s.cur != nil {
			done = s.cur
		}
		s.cur = &record{line: s.lr.line, step: st, hasStep: true}
	}
	if s.cur == nil {
		s.cur = &record{line: s.lr.line}
	}
	r := s.cur
	if v, fm, ok, err := num("time"); err != nil {
		return nil, err
	} else if ok {
		r.time, r.hasTime = v, true
		s.merge("time", fm)
	}
	for i, q := range scalarNames {
		if v, fm, ok, err := num(q); err != nil {
			return nil, err
		} else if ok {
			r.scalar[i], r.hasScalar[i] = v, true
			s.merge(q, fm)
		}
	}
	if v, ok, err := integer("active_state"); err != nil {
		return nil, err
	} else if ok {
		r.active, r.hasActive = int(v), true
	}
	state := -1
	if v, ok, err := integer("state"); err != nil {
		return nil, err
	} else if ok {
		state = int(v)
	}
	for _, q := range []string{"state_energy", "population"} {
		v, fm, ok, err := num(q)
		if err != nil {
			return nil, err
		}
		if ok {
			if state < 0 {
				return nil, &ParseError{File: s.path, Line: s.lr.line, Err: detail(ErrHeader, "group %s needs a state group in the same pattern, or use %s_K", q, q)}
			}
			s.add(r, q, state, v, fm)
		}
	}
	for i, n := range names {
		if m[2*i] < 0 {
			continue
		}
		for _, q := range []string{"state_energy_", "population_"} {
			if strings.HasPrefix(n, q) {
				k, err := strconv.Atoi(n[len(q):])
				if err != nil {
					return nil, &ParseError{File: s.path, Line: s.lr.line, Err: detail(ErrHeader, "group %s: expected %sK with K a state number", n, q)}
				}
				v, fm, _, err := num(n)
				if err != nil {
					return nil, err
				}
				s.add(r, strings.TrimSuffix(q, "_"), k, v, fm)
			}
		}
	}
	return done, nil
}

func (s *logSource) add(r *record, q string, k int, v float64, fm textnum.Format) {
	if q == "state_energy" {
		r.stateE = setState(r.stateE, k, v)
	} else {
		r.pop = setState(r.pop, k, v)
	}
	s.merge(q, fm)
}
