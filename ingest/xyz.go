package ingest

import (
	"fmt"
	"io"
	"sort"
	"strconv"
	"strings"

	"trajvault/internal/finding"
	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
	"trajvault/provenance"
)

// Column is one per-atom property of a frame, flattened row-major (N x
// Width), with the widest printed format of its values.
type Column struct {
	Name   string
	Width  int
	Values []float64
	Format textnum.Format
	// raw is the format of the last value merged: a value printed like
	// it changes nothing (mergeRaw).
	raw textnum.Format
}

// mergeRaw widens c.Format by fm, the format of one more value. Merge
// is skipped when fm equals the previous value's format: with f' =
// f.Merge(g), f'.Merge(g) == f' (every field of Merge is a max, an AND
// or an OR of the same operand, and Shortest is a function of mixed and
// cand; TestMergeIdempotent checks it), and g.Merge(g) == g for a parsed
// g, so the result is the same as merging every value (Merge was 5 %
// of convert's CPU, one call per number).
func (c *Column) mergeRaw(fm textnum.Format, first bool) {
	switch {
	case first:
		c.Format, c.raw = fm, fm
	case fm != c.raw:
		c.Format, c.raw = c.Format.Merge(fm), fm
	}
}

// Frame is one frame of an XYZ or extended XYZ file.
type Frame struct {
	Line    int // line of the atom-count line
	Symbols []string
	// Columns holds the numeric per-atom properties: "pos" always, and for
	// extended XYZ every numeric property of Properties= (e.g. "velo",
	// "forces", "momenta", "masses").
	Columns []*Column
	Comment string
	// Info holds the key=value pairs of an extended XYZ comment line.
	Info map[string]string
	// InfoFormats records how numeric Info values were printed.
	InfoFormats map[string]textnum.Format
	Extended    bool
	// Other names the per-atom columns that are not numbers (types S and
	// L of Properties), apart from the species.
	Other []string
}

// Column returns the named column, or nil.
func (f *Frame) Column(name string) *Column {
	for _, c := range f.Columns {
		if c.Name == name {
			return c
		}
	}
	return nil
}

// XYZReader reads multi-frame XYZ and extended XYZ files one frame at a
// time, in memory proportional to one frame.
//
// XYZ: a line with the atom count N, a comment line, then N lines
// "symbol x y z". Extended XYZ (common practice, the format written by
// general-purpose tools such as python3-ase) puts key=value pairs on the
// comment line; Properties=name:type:count:... describes the per-atom
// columns (types S string, R real, I integer, L logical).
type XYZReader struct {
	file   string
	lr     *lineReader
	fields []field
	frames int
	lastN  int
	// notShort holds the columns (by name) some earlier frame has ruled
	// out of the shortest round-trip class: their values are not tested
	// again (the test formats every value). A frame's format of such a
	// column then says "not shortest" from its first value; the file's
	// format, the merge of all frames, is the same, as Merge only ever
	// clears candidate bits.
	notShort map[string]bool
	// infoNotShort is notShort for the numeric comment keys.
	infoNotShort map[string]bool
	// symbols are the previous frame's symbols: a symbol equal to the
	// one of the same atom before shares its string.
	symbols []string
	// propSpec and props are the last Properties= value and what it
	// says (parsed once while it does not change).
	propSpec string
	props    []property
	// spare are the columns of a frame handed back (reuse), whose value
	// buffers the next frame fills.
	spare []*Column
}

// reuse hands fr back: the caller keeps nothing of it, so that the next
// frame may write its values into fr's buffers.
func (x *XYZReader) reuse(fr *Frame) { x.spare = fr.Columns }

// NewXYZReader reads from r; file names the input in errors.
func NewXYZReader(r io.Reader, file string) *XYZReader {
	return &XYZReader{file: file, lr: newLineReader(r), notShort: map[string]bool{}, infoNotShort: map[string]bool{}}
}

func (x *XYZReader) errAt(line, col int, err error) error {
	return &ParseError{File: x.file, Line: line, Column: col, Err: err}
}

// Next returns the next frame, io.EOF after the last one, or an error; a
// file cut inside a frame gives a *ParseError wrapping ErrTruncated.
func (x *XYZReader) Next() (*Frame, error) {
	var b []byte
	var err error
	for { // skip blank lines between frames
		b, err = x.lr.next()
		if err != nil {
			return nil, err // io.EOF: clean end
		}
		if strings.TrimSpace(string(b)) != "" {
			break
		}
	}
	countLine := x.lr.line
	x.fields = splitFields(b, 0, x.fields)
	if len(x.fields) != 1 {
		return nil, x.errAt(countLine, 1, detail(ErrHeader, "expected the atom count alone on the line, found %q", strings.TrimSpace(string(b))))
	}
	n, perr := strconv.Atoi(x.fields[0].text)
	if perr != nil || n < 1 {
		return nil, x.errAt(countLine, x.fields[0].col, detail(ErrHeader, "expected a positive atom count, found %q", x.fields[0].text))
	}
	if x.lastN != 0 && n != x.lastN {
		return nil, x.errAt(countLine, x.fields[0].col, detail(ErrAtomCount, "frame %d has %d atoms, earlier frames %d; one file must hold one system", x.frames+1, n, x.lastN))
	}
	comment, err := x.lr.next()
	if err == io.EOF {
		return nil, x.errAt(countLine, 0, detail(ErrTruncated, "frame %d: no comment line after the atom count", x.frames+1))
	} else if err != nil {
		return nil, err
	}
	// The count line is input: never allocate by it unchecked (a cut or
	// corrupt file may claim billions of atoms).
	capN := min(n, 1<<16)
	fr := &Frame{Line: countLine, Comment: string(comment), Symbols: make([]string, 0, capN)}
	props, err := x.parseComment(fr)
	if err != nil {
		return nil, err
	}
	cols := make([]*Column, 0, len(props))
	check := make([]bool, 0, len(props))
	for _, p := range props {
		if p.kind == 'R' || p.kind == 'I' {
			var c *Column
			if k := len(cols); k < len(x.spare) && x.spare[k].Name == p.name {
				c = x.spare[k]
				*c = Column{Name: p.name, Width: p.count, Values: c.Values[:0]}
			} else {
				c = &Column{Name: p.name, Width: p.count, Values: make([]float64, 0, capN*min(p.count, 16))}
			}
			cols = append(cols, c)
			check = append(check, !x.notShort[p.name])
		}
	}
	fr.Columns = cols
	x.spare = nil
	for _, p := range props {
		if p.kind != 'R' && p.kind != 'I' && p.name != "species" {
			fr.Other = append(fr.Other, p.name)
		}
	}
	width := 0
	for _, p := range props {
		width += p.count
	}
	var fm textnum.Format
	for i := 0; i < n; i++ {
		b, err := x.lr.next()
		if err == io.EOF {
			return nil, x.errAt(x.lr.line, 0, detail(ErrTruncated, "frame %d (count line %d) has %d of %d atom lines", x.frames+1, countLine, i, n))
		} else if err != nil {
			return nil, err
		}
		x.fields = splitView(b, 0, x.fields)
		if len(x.fields) < width {
			col := len(b) + 1
			if x.lr.atEOF() {
				return nil, x.errAt(x.lr.line, col, detail(ErrTruncated, "frame %d (count line %d): the last atom line has %d of %d fields", x.frames+1, countLine, len(x.fields), width))
			}
			return nil, x.errAt(x.lr.line, col, detail(ErrFieldCount, "expected %d fields (%s), found %d; a short line usually means the file was cut", width, describe(props), len(x.fields)))
		}
		if len(x.fields) > width && fr.Extended {
			return nil, x.errAt(x.lr.line, x.fields[width].col, detail(ErrFieldCount, "expected %d fields (%s), found %d", width, describe(props), len(x.fields)))
		}
		k, ci := 0, 0
		for _, p := range props {
			if p.kind != 'R' && p.kind != 'I' {
				if p.name == "species" {
					// Fields are views into the line buffer: the symbol
					// is copied, once per file when the atoms keep
					// their symbols.
					sym := x.fields[k].text
					if i < len(x.symbols) && x.symbols[i] == sym {
						sym = x.symbols[i]
					} else {
						sym = strings.Clone(sym)
					}
					fr.Symbols = append(fr.Symbols, sym)
				}
				k += p.count
				continue
			}
			c, chk := cols[ci], check[ci]
			ci++
			for j := 0; j < p.count; j++ {
				f := x.fields[k]
				v, err := textnum.ParseShortTo(f.text, chk && (len(c.Values) == 0 || c.Format.MayBeShortest()), &fm)
				if err != nil {
					cause := ErrNumber
					if nonFinite(f.text) {
						cause = ErrNonFinite
					}
					return nil, x.errAt(x.lr.line, f.col, detail(cause, "%s component %d of atom %d: expected a number, found %q", p.name, j+1, i+1, f.text))
				}
				c.Values = append(c.Values, v)
				c.mergeRaw(fm, len(c.Values) == 1)
				k++
			}
		}
	}
	for _, c := range cols {
		if !c.Format.MayBeShortest() {
			x.notShort[c.Name] = true
		}
	}
	x.symbols = fr.Symbols
	x.frames++
	x.lastN = n
	return fr, nil
}

type property struct {
	name  string
	kind  byte
	count int
}

func describe(props []property) string {
	var parts []string
	for _, p := range props {
		parts = append(parts, fmt.Sprintf("%s x%d", p.name, p.count))
	}
	return strings.Join(parts, ", ")
}

var plainXYZ = []property{{"species", 'S', 1}, {"pos", 'R', 3}}

// parseComment reads extended-XYZ key=value pairs when the comment line
// has them, and returns the per-atom properties.
func (x *XYZReader) parseComment(fr *Frame) ([]property, error) {
	kv, ok := parseKeyValues(fr.Comment)
	if !ok || len(kv) == 0 {
		return plainXYZ, nil
	}
	// A plain comment such as "t = 5 fs" is not extended XYZ: require
	// Properties= or at least every token to be key=value.
	fr.Info = make(map[string]string, len(kv))
	fr.InfoFormats = make(map[string]textnum.Format, len(kv))
	for _, p := range kv {
		fr.Info[p[0]] = p[1]
		if v := p[1]; v != "" {
			// The shortest test as for columns: once per key until a
			// value rules the class out (notShort).
			check := !x.infoNotShort[p[0]]
			if _, fm, err := textnum.ParseShort(v, check); err == nil {
				fr.InfoFormats[p[0]] = fm
				if check && !fm.MayBeShortest() {
					x.infoNotShort[p[0]] = true
				}
			}
		}
	}
	fr.Extended = true
	spec, ok := fr.Info["Properties"]
	if !ok {
		return plainXYZ, nil
	}
	if spec == x.propSpec && x.props != nil {
		return x.props, nil // as the frame before (props are never changed)
	}
	parts := strings.Split(spec, ":")
	if len(parts)%3 != 0 {
		return nil, x.errAt(x.lr.line, strings.Index(fr.Comment, "Properties=")+1, detail(ErrHeader, "Properties=%s: expected name:type:count triples", spec))
	}
	var props []property
	for i := 0; i < len(parts); i += 3 {
		n, err := strconv.Atoi(parts[i+2])
		t := strings.ToUpper(parts[i+1])
		if err != nil || n < 1 || len(t) != 1 || !strings.Contains("SRIL", t) {
			return nil, x.errAt(x.lr.line, strings.Index(fr.Comment, "Properties=")+1, detail(ErrHeader, "Properties entry %s:%s:%s: expected type S, R, I or L and a positive count", parts[i], parts[i+1], parts[i+2]))
		}
		props = append(props, property{parts[i], t[0], n})
	}
	if props[0].kind != 'S' || props[0].count != 1 {
		return nil, x.errAt(x.lr.line, strings.Index(fr.Comment, "Properties=")+1, detail(ErrHeader, "Properties must start with the species column (species:S:1), found %s:%c:%d", props[0].name, props[0].kind, props[0].count))
	}
	props[0].name = "species"
	seen := map[string]bool{}
	for _, p := range props {
		if p.name == "" || seen[p.name] {
			return nil, x.errAt(x.lr.line, strings.Index(fr.Comment, "Properties=")+1, detail(ErrHeader, "Properties names a column %q twice or not at all; give each column its own name", p.name))
		}
		seen[p.name] = true
	}
	hasPos := false
	for _, p := range props {
		hasPos = hasPos || (p.name == "pos" && p.count == 3 && p.kind == 'R')
	}
	if !hasPos {
		return nil, x.errAt(x.lr.line, strings.Index(fr.Comment, "Properties=")+1, detail(ErrHeader, "Properties has no pos:R:3 column"))
	}
	x.propSpec, x.props = spec, props
	return props, nil
}

// parseKeyValues splits `a=1 b="x y" flag` into pairs; ok is false when
// the line is not of that form (then it is a free-text comment).
func parseKeyValues(s string) ([][2]string, bool) {
	var out [][2]string
	i := 0
	for i < len(s) {
		for i < len(s) && (s[i] == ' ' || s[i] == '\t') {
			i++
		}
		if i == len(s) {
			break
		}
		j := i
		for j < len(s) && s[j] != '=' && s[j] != ' ' && s[j] != '\t' {
			j++
		}
		key := s[i:j]
		if key == "" || !validKey(key) {
			return nil, false
		}
		if j == len(s) || s[j] != '=' {
			out = append(out, [2]string{key, "T"})
			i = j
			continue
		}
		j++ // '='
		if j < len(s) && (s[j] == '"' || s[j] == '\'' || s[j] == '{') {
			closing := s[j]
			if closing == '{' {
				closing = '}'
			}
			k := strings.IndexByte(s[j+1:], closing)
			if k < 0 {
				return nil, false
			}
			out = append(out, [2]string{key, s[j+1 : j+1+k]})
			i = j + 1 + k + 1
			continue
		}
		k := j
		for k < len(s) && s[k] != ' ' && s[k] != '\t' {
			k++
		}
		out = append(out, [2]string{key, s[j:k]})
		i = k
	}
	// Bare words only (no '=' at all) are a free-text comment.
	for _, p := range out {
		if p[1] != "T" || strings.Contains(s, p[0]+"=T") {
			return out, true
		}
	}
	return nil, false
}

func validKey(k string) bool {
	for i, r := range k {
		if !(r == '_' || r == '-' || r == '.' || (r >= 'a' && r <= 'z') || (r >= 'A' && r <= 'Z') || (i > 0 && r >= '0' && r <= '9')) {
			return false
		}
	}
	return true
}

// xyzFormat reads XYZ and extended XYZ geometry files.
var xyzFormat = Reader{
	Kind: KindXYZ, Role: RoleGeometry, Extensions: []string{".xyz", ".extxyz"}, ProvenanceRole: "geometry",
	Open: func(path string, _ any, rc *Recipe) (source, error) { return openXYZ(path, rc) },
}

type xyzSource struct {
	path    string
	f       *hashedFile // hashed as read (digest)
	r       *XYZReader
	last    *Frame // the frame of the last record (recycle)
	recipe  *Recipe
	fmts    formatSet
	columns map[string]string
	// unit holds the units named by KEY_unit= comment keys, by unit kind.
	unit map[string]string
	// unitAt says where each unit of unit is written (unitWhere).
	unitAt map[string]string
	// keyNotShort holds the comment keys ruled out of the shortest
	// round-trip class (XYZReader.notShort).
	keyNotShort map[string]bool
	colQ        map[string]string      // columnQuantity, by name
	keys        map[string]*commentKey // keyInfo, by key
	notes
}

// unitKey reads KEY_unit=UNIT, the unit of the per-atom property or
// comment key KEY (as trajvault's extended-XYZ export writes it, e.g.
// pos_unit=angstrom forces_unit="hartree bohr-1"), and reports whether
// key was one. A kind given two different units is an error: numbers are
// stored as printed, one unit per kind.
func (s *xyzSource) unitKey(fr *Frame, key, val string, col int) (bool, error) {
	base, ok := strings.CutSuffix(key, "_unit")
	if !ok {
		return false, nil
	}
	q := s.columnQuantity(base)
	if q == "" {
		q = quantity.CommentKey(base)
	}
	kind := string(quantity.UnitKind(q))
	if kind == "" {
		return false, nil
	}
	if old, ok := s.unit[kind]; ok && old != val {
		return true, &ParseError{File: s.path, Line: fr.Line + 1, Column: col, Err: detail(ErrHeader, "%s: %s is in %q here and %q before; trajvault stores numbers as printed, so one unit per kind of quantity", key, kind, val, old)}
	}
	if s.unit == nil {
		s.unit, s.unitAt = map[string]string{}, map[string]string{}
	}
	if _, ok := s.unit[kind]; !ok {
		s.unitAt[kind] = fmt.Sprintf("%s:%d:%d (%s=%s)", s.path, fr.Line+1, col, key, val)
	}
	s.unit[kind] = val
	return true, nil
}

func openXYZ(path string, rc *Recipe) (*xyzSource, error) {
	f, err := openHashed(path)
	if err != nil {
		return nil, err
	}
	s := &xyzSource{path: path, f: f, r: NewXYZReader(f, path), recipe: rc, fmts: formatSet{}, columns: map[string]string{}, keyNotShort: map[string]bool{}}
	if rc != nil && rc.Geometry != nil {
		for k, v := range rc.Geometry.Columns {
			s.columns[k] = v
		}
	}
	return s, nil
}

func (s *xyzSource) file() string                        { return s.path }
func (s *xyzSource) provides() map[string]textnum.Format { return s.fmts }
func (s *xyzSource) timeFormat() textnum.Format          { return s.fmts[quantity.TimeQ] }
func (s *xyzSource) units() map[string]string            { return s.unit }
func (s *xyzSource) unitWhere(kind string) string        { return s.unitAt[kind] }
func (s *xyzSource) hops() []hop                         { return nil }
func (s *xyzSource) close()                              { s.f.Close() }
func (s *xyzSource) digest() (provenance.Source, bool)   { return s.f.sum(s.path) }

// columnQuantity maps an extended XYZ property name to a quantity: the
// recipe's geometry columns, then the vocabulary (remembered per name:
// it is asked for every column of every frame).
func (s *xyzSource) columnQuantity(name string) string {
	if q, ok := s.colQ[name]; ok {
		return q
	}
	q, ok := s.columns[name]
	if !ok {
		q = quantity.Property(name)
	}
	if s.colQ == nil {
		s.colQ = map[string]string{}
	}
	s.colQ[name] = q
	return q
}

// commentKey is what a comment key means, worked out once per key (it
// is met on every frame).
type commentKey struct {
	q, m   string // quantity; the recipe's mapping, if mapped
	mapped bool
	amb    []quantity.Meaning // quantity.Ambiguous
	noted  bool               // its note is made
}

func (s *xyzSource) keyInfo(key string) *commentKey {
	if ki, ok := s.keys[key]; ok {
		return ki
	}
	ki := &commentKey{q: quantity.CommentKey(key), amb: quantity.Ambiguous(key)}
	if m, ok := s.columns[key]; ok {
		ki.q, ki.m, ki.mapped = m, m, true
	}
	if s.keys == nil {
		s.keys = map[string]*commentKey{}
	}
	s.keys[key] = ki
	return ki
}

// recycle lets the next frame reuse the buffers of the last one.
func (s *xyzSource) recycle() {
	if s.last != nil {
		s.r.reuse(s.last)
		s.last = nil
	}
}

func (s *xyzSource) next() (*record, error) {
	fr, err := s.r.Next()
	if err != nil {
		return nil, err
	}
	s.last = fr
	rec := &record{line: fr.Line, symbols: fr.Symbols}
	for _, c := range fr.Columns {
		q := s.columnQuantity(c.Name)
		if q == "" {
			// Kept under its own name, without a unit (issue 10: unknown
			// per-atom columns are extra particle elements).
			why := trajfile.ExtraNameProblem(c.Name)
			if why == "" {
				s.fmts.merge(ExtraPrefix+c.Name, c.Format)
				rec.extras = append(rec.extras, atomColumn{c.Name, c.Values, fixedDec(c.Format)})
				continue
			}
			s.add("col:"+c.Name, sourceNote{code: PNotStored, sev: finding.Note, line: fr.Line + 1,
				msg:       fmt.Sprintf("per-atom column %s (%d value(s) per atom) is not a quantity trajvault knows and cannot be kept under its own name: %s; rename it, or map it in a recipe", c.Name, c.Width, why),
				notStored: fmt.Sprintf("per-atom column %s: not a known quantity, and %s", c.Name, why)})
			continue
		}
		if q == quantity.Ignore {
			why := "ignored by the recipe"
			s.add("col:"+c.Name, sourceNote{code: PNotStored, sev: finding.Note, line: fr.Line + 1,
				msg:       fmt.Sprintf("per-atom column %s (%d value(s) per atom): %s", c.Name, c.Width, why),
				notStored: fmt.Sprintf("per-atom column %s: %s", c.Name, why)})
			continue
		}
		s.fmts.merge(q, c.Format)
		rec.atoms = append(rec.atoms, atomColumn{q, c.Values, fixedDec(c.Format)})
	}
	for _, name := range fr.Other {
		s.add("col:"+name, sourceNote{code: PNotStored, sev: finding.Note, line: fr.Line + 1,
			msg:       fmt.Sprintf("per-atom column %s is not numeric; it is not stored", name),
			notStored: fmt.Sprintf("per-atom column %s: not numeric", name)})
	}
	for _, k := range []string{"Lattice", "pbc"} {
		if v, ok := fr.Info[k]; ok {
			s.add("key:"+k, sourceNote{code: PNotStored, sev: finding.Note, line: fr.Line + 1,
				msg:       fmt.Sprintf("comment key %s=%q (the cell) is not stored: trajvault stores no simulation box from XYZ files", k, v),
				notStored: fmt.Sprintf("comment key %s: the cell is not stored", k)})
		}
	}
	// Step, time and energies from the comment line: extended XYZ keys,
	// then the recipe's patterns. A recipe's geometry columns map also
	// names comment keys (e.g. energy: total_energy).
	set := func(key, val string, col int) error {
		if done, err := s.unitKey(fr, key, val, col); done || err != nil {
			return err
		}
		ki := s.keyInfo(key)
		q, m, mapped := ki.q, ki.m, ki.mapped
		if q == quantity.Ignore || (q == "" && !mapped) || (mapped && !perFrame(q)) {
			if ki.noted {
				return nil // said once, at its first line
			}
			ki.noted = true
			why := "not a quantity trajvault knows (" + quantity.Names() + ")"
			switch {
			case q == quantity.Ignore:
				why = "ignored by the recipe"
			case mapped:
				why = fmt.Sprintf("the recipe maps it to %q, which is not a per-frame quantity", m)
			}
			s.add("key:"+key, sourceNote{code: PNotStored, sev: finding.Note, line: fr.Line + 1, col: col,
				msg:       fmt.Sprintf("comment key %s: %s; it is not stored", key, why),
				notStored: fmt.Sprintf("comment key %s: %s", key, why)})
			return nil
		}
		if a := ki.amb; a != nil && !mapped && !ki.noted {
			ki.noted = true
			s.add("ambiguous:"+key, sourceNote{code: PAmbiguous, sev: finding.Note, line: fr.Line + 1, col: col, quantity: q,
				msg: fmt.Sprintf("%s= read as %s (the extended XYZ convention); as a %s it would mean %s. If it is not the %s, say which it is in a recipe: geometry: columns: {%s: %s}",
					key, q, a[0].Source, a[0].Quantity, q, key, a[0].Quantity)})
		}
		// The shortest test until a value of key rules the class out
		// (the merged format is the same, see XYZReader.notShort); the
		// step's format is not kept.
		check := q != quantity.Step && !s.keyNotShort[key]
		v, fm, err := textnum.ParseShort(val, check)
		if check && err == nil && !fm.MayBeShortest() {
			s.keyNotShort[key] = true
		}
		if err != nil {
			cause := ErrNumber
			if nonFinite(val) {
				cause = ErrNonFinite
			}
			return &ParseError{File: s.path, Line: fr.Line + 1, Column: col, Err: detail(cause, "%s: expected a number, found %q", key, val)}
		}
		switch q {
		case quantity.Step:
			if fm.Decimals != 0 || fm.Exp {
				return &ParseError{File: s.path, Line: fr.Line + 1, Column: col, Err: detail(ErrNumber, "step: expected an integer, found %q", val)}
			}
			rec.step, rec.hasStep = int64(v), true
		case quantity.TimeQ:
			rec.time, rec.hasTime = v, true
			s.fmts.merge(q, fm)
		default:
			if i := quantity.ScalarIndex(q); i >= 0 {
				rec.scalar[i], rec.hasScalar[i] = v, true
				s.fmts.merge(q, fm)
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

// fixedDec is atomColumn.dec for a column of format f.
func fixedDec(f textnum.Format) int {
	if f.Fixed() {
		return f.Decimals + 1
	}
	return 0
}

// perFrame reports whether q is a per-frame quantity a comment line can
// give (step, time, an energy).
func perFrame(q string) bool {
	return q == quantity.Step || q == quantity.TimeQ || quantity.ScalarIndex(q) >= 0
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
