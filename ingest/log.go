package ingest

import (
	"fmt"
	"io"
	"strconv"
	"strings"

	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
	"trajvault/provenance"
)

// logFormat reads line-oriented logs with a recipe's regular expressions;
// no extension selects it (a recipe names the file and its rules).
var logFormat = Reader{
	Kind: KindLog, Role: RoleRecords, Events: true, ProvenanceRole: "log",
	Open: func(path string, spec any, _ *Recipe) (source, error) {
		ls, _ := spec.(*LogSpec)
		if ls == nil {
			return nil, fmt.Errorf("%s: a log needs a recipe entry with its rules", path)
		}
		return openLog(path, ls)
	},
}

type logSource struct {
	path  string
	f     *hashedFile // hashed as read (digest)
	lr    *lineReader
	spec  *LogSpec
	cur   *record
	fmts  formatSet
	hopsL []hop
	done  bool
	// matched counts the lines each rule matched (P19, matches.go).
	matched []int
}

func openLog(path string, spec *LogSpec) (*logSource, error) {
	f, err := openHashed(path)
	if err != nil {
		return nil, err
	}
	return &logSource{path: path, f: f, lr: newLineReader(f), spec: spec, fmts: formatSet{}}, nil
}

func (s *logSource) file() string                        { return s.path }
func (s *logSource) provides() map[string]textnum.Format { return s.fmts }
func (s *logSource) timeFormat() textnum.Format          { return s.fmts[quantity.TimeQ] }
func (s *logSource) units() map[string]string            { return nil }
func (s *logSource) hops() []hop                         { return s.hopsL }
func (s *logSource) close()                              { s.f.Close() }
func (s *logSource) digest() (provenance.Source, bool)   { return s.f.sum(s.path) }

func (s *logSource) merge(q string, f textnum.Format) { s.fmts.merge(q, f) }

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
		for i, rule := range s.spec.Rules {
			m := rule.re.FindStringSubmatchIndex(line)
			if m == nil {
				continue
			}
			s.countMatch(i)
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
		v, fm, err := textnum.ParseShort(txt, true)
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
	for i, q := range quantity.ScalarNames {
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
	if q == quantity.StateEnergy {
		r.stateE = setState(r.stateE, k, v)
	} else {
		r.pop = setState(r.pop, k, v)
	}
	s.merge(q, fm)
}
