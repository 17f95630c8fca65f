package ingest

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sync"

	"trajvault/internal/outdir"
	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
)

// The spool (issue 14, "one pass over the text"): Scan parses every
// number once and writes each record it read, bit for bit, to a
// temporary file; Convert replays the records from there instead of
// parsing the text again (parsing was more than half of convert's CPU).
// The file lives in the output's folder (Options.SpoolDir), never in
// /tmp, which may be small or in memory, under a hidden name with an
// owner marker like every temporary output (internal/outdir), so that a
// killed run's spool is removed by a later run. Records stream through
// it one at a time: memory does not grow with frames.
//
// A record is, in this order (uvarint and varint as encoding/binary, f64
// the IEEE bits little-endian, so NaN payloads and -0 survive):
//
//	uvarint flags (spool* bits below)
//	uvarint line
//	varint  step            if spoolStep
//	f64     time            if spoolTime
//	f64     scalar[i]       for each spoolScalar0<<i set
//	varint  active          if spoolActive
//	states  stateE, pop     uvarint 0 for nil, else len+1, then f64s
//	symbols                 if spoolSymbols and not spoolSameSymbols:
//	                        uvarint n, n string references
//	columns atoms, extras   uvarint count, then per column a string
//	                        reference (the quantity), uvarint n + 1 (0:
//	                        nil) and, unless nil, a byte: 0 for n f64
//	                        values, else D + 1 for decimals D, a uvarint
//	                        byte count and n varints m, the values
//	                        m / 10^D (spoolWriter.scaled)
//
// A field whose flag is clear is zero, as every source leaves it. A
// string reference is uvarint k+1 for the k-th string of the section,
// or 0 followed by uvarint length and the bytes of a new string.
const (
	spoolStep uint64 = 1 << iota
	spoolTime
	spoolScalar0
	spoolScalar1
	spoolScalar2
	spoolActive
	spoolSymbols
	spoolSameSymbols
)

// maxSpoolLen bounds a length read back from a spool. A length is also
// never larger than the bytes left in its section (every element takes
// at least one byte), so a damaged spool cannot make the reader allocate
// more than the spool's own size.
const maxSpoolLen = 1 << 31

// spoolFile is the spool of one trajectory: one section per source, in
// the order of TrajReport.Files.
type spoolFile struct {
	path     string
	sections [][2]int64 // offset, length
	once     sync.Once
	removed  bool // by remove: the conversion reads the text again
}

// remove deletes the spool and its owner marker; safe to call twice.
func (sf *spoolFile) remove() {
	if sf == nil {
		return
	}
	sf.once.Do(func() {
		os.Remove(sf.path)
		outdir.Unmark(sf.path)
		sf.removed = true
	})
}

// spoolWriter writes records of one trajectory's sources.
type spoolWriter struct {
	sf    *spoolFile
	f     *os.File
	bw    *bufio.Writer
	buf   []byte
	off   int64 // bytes written so far
	start int64 // offset of the current section
	strs  map[string]uint64
	syms  []string // the previous record's symbols
	// decimals are the decimals of each quantity's last scaled block,
	// by the quantity's string number (str).
	decimals []int
	tmp      []byte
	err      error // the first write error (sticky)
}

// newSpool creates the spool of trajectory name in dir.
func newSpool(dir, name string) (*spoolWriter, error) {
	f, err := os.CreateTemp(dir, "."+filepath.Base(name)+".trajvault-spool-*")
	if err != nil {
		return nil, fmt.Errorf("spool for %s: %w", name, err)
	}
	if err := outdir.Mark(f.Name()); err != nil {
		f.Close()
		os.Remove(f.Name())
		return nil, fmt.Errorf("spool for %s: %w", name, err)
	}
	return &spoolWriter{sf: &spoolFile{path: f.Name()}, f: f, bw: bufio.NewWriterSize(f, 256<<10)}, nil
}

// begin starts the section of the next source: strings and symbols are
// shared only within a section, which is read on its own.
func (w *spoolWriter) begin() {
	w.start = w.off
	w.strs = map[string]uint64{}
	w.syms = nil
	w.decimals = w.decimals[:0]
}

// end closes the current section.
func (w *spoolWriter) end() {
	w.sf.sections = append(w.sf.sections, [2]int64{w.start, w.off - w.start})
}

// finish flushes and closes the file; the spool is removed on error.
func (w *spoolWriter) finish() (*spoolFile, error) {
	if w.err == nil {
		w.err = w.bw.Flush()
	}
	if err := w.f.Close(); w.err == nil {
		w.err = err
	}
	if w.err != nil {
		return nil, w.failure()
	}
	return w.sf, nil
}

// failure removes the spool after a write error and says what failed.
func (w *spoolWriter) failure() error {
	w.f.Close()
	w.sf.remove()
	return fmt.Errorf("writing %s, the numbers the scan parsed, kept in the output's folder for the conversion (about a third of the logs' size; make room there or write the output elsewhere): %w", w.sf.path, w.err)
}

// abort closes and removes the spool.
func (w *spoolWriter) abort() {
	w.f.Close()
	w.sf.remove()
}

func (w *spoolWriter) uvarint(x uint64) { w.buf = binary.AppendUvarint(w.buf, x) }
func (w *spoolWriter) f64(v float64) {
	w.buf = binary.LittleEndian.AppendUint64(w.buf, math.Float64bits(v))
}

// str writes a string reference and returns the string's number in the
// section.
func (w *spoolWriter) str(s string) uint64 {
	if k, ok := w.strs[s]; ok {
		w.uvarint(k + 1)
		return k
	}
	k := uint64(len(w.strs))
	w.strs[s] = k
	w.uvarint(0)
	w.uvarint(uint64(len(s)))
	w.buf = append(w.buf, s...)
	return k
}

func (w *spoolWriter) floats(v []float64) {
	if v == nil {
		w.uvarint(0)
		return
	}
	w.uvarint(uint64(len(v)) + 1)
	for _, x := range v {
		w.f64(x)
	}
}

func (w *spoolWriter) columns(cs []atomColumn) {
	w.uvarint(uint64(len(cs)))
	for _, c := range cs {
		k := w.str(c.quantity)
		if c.values != nil && c.dec > 0 && w.fixed(c.values, c.dec-1) {
			continue
		}
		w.scaled(k, c.values)
	}
}

// exact10 are the powers of ten that are exact in float64 (5^22 < 2^53).
var exact10 = [23]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9,
	1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// scaledInt returns m with float64(m) / p == x bit for bit (p an exact
// power of ten), when there is one below 2^53: x printed with at most
// as many decimals as p has zeros. Then m and the decimals give x back
// exactly, as the division is correctly rounded (IEEE 754) and its
// operands are exact. Negative zero, NaN and infinities have none.
func scaledInt(x, p float64) (int64, bool) {
	y := x * p
	if !(math.Abs(y) < 1<<53) {
		return 0, false
	}
	// y is within an ulp of the integer when there is one: rounding half
	// away from zero finds it (a wrong m fails the check below).
	m := int64(y + math.Copysign(0.5, y))
	if float64(m)/p != x || (x == 0 && math.Signbit(x)) {
		return 0, false
	}
	return m, true
}

// decimalsFor is the fewest decimals d >= from with a scaledInt for x,
// or false.
func decimalsFor(x float64, from int) (int, bool) {
	for d := from; d < len(exact10); d++ {
		if _, ok := scaledInt(x, exact10[d]); ok {
			return d, true
		}
	}
	return 0, false
}

// fixed writes values v printed in fixed notation with at most d
// decimals (the reader's format says so) as scaled integers without the
// division per value of scaled, and reports whether it could.
//
// Why no check is needed: a value printed as the integer m over 10^e
// (e <= d) was read as x = RN(m / 10^e), RN the round to nearest of
// IEEE 754 (the fast path of textnum.Parse and strconv.ParseFloat are
// both correctly rounded). With M = m 10^(d-e) and p = 10^d exact,
// fl(x p) = M (1 + a)(1 + b), |a|, |b| <= 2^-53, so |fl(x p) - M| <
// |M| 2^-51.9 < 1/4 while |M| < 2^50: rounding fl(x p) gives M. The
// reader's float64(M) / p = RN(M / 10^d) = RN(m / 10^e) = x, M and p
// exact. Negative zero (M = 0 gives +0) and larger magnitudes are left
// to scaled. TestSpoolFixedBits checks it against strconv.ParseFloat.
func (w *spoolWriter) fixed(v []float64, d int) bool {
	if d >= len(exact10) {
		return false
	}
	p := exact10[d]
	w.tmp = w.tmp[:0]
	for _, x := range v {
		y := x * p
		if !(math.Abs(y) < 1<<50) || (x == 0 && math.Signbit(x)) {
			return false
		}
		w.tmp = binary.AppendVarint(w.tmp, int64(y+math.Copysign(0.5, y)))
	}
	w.uvarint(uint64(len(v)) + 1)
	w.buf = append(w.buf, byte(d+1))
	w.uvarint(uint64(len(w.tmp)))
	w.buf = append(w.buf, w.tmp...)
	return true
}

// scaled writes the per-atom values v of quantity number q (str).
// Numbers printed with D decimals are written as varints of x 10^D
// (about 3-5 bytes instead of 8: the spool of a long run is large),
// checked value by value to read back bit for bit (scaledInt); a column
// where some value has no such form (exponent notation with many
// digits, -0) is written as raw IEEE bits. D is remembered per quantity
// and only grows within a block.
func (w *spoolWriter) scaled(q uint64, v []float64) {
	if v == nil {
		w.uvarint(0)
		return
	}
	w.uvarint(uint64(len(v)) + 1)
	for uint64(len(w.decimals)) <= q {
		w.decimals = append(w.decimals, 0)
	}
	d := w.decimals[q]
	for {
		p := exact10[d]
		w.tmp = w.tmp[:0]
		i := 0
		for ; i < len(v); i++ {
			m, ok := scaledInt(v[i], p)
			if !ok {
				break
			}
			w.tmp = binary.AppendVarint(w.tmp, m)
		}
		if i == len(v) {
			w.decimals[q] = d
			w.buf = append(w.buf, byte(d+1))
			w.uvarint(uint64(len(w.tmp)))
			w.buf = append(w.buf, w.tmp...)
			return
		}
		nd, ok := decimalsFor(v[i], d+1)
		if !ok {
			break
		}
		d = nd
	}
	w.buf = append(w.buf, 0)
	for _, x := range v {
		w.f64(x)
	}
}

// write appends one record.
func (w *spoolWriter) write(r *record) error {
	if w.err != nil {
		return w.err
	}
	w.buf = w.buf[:0]
	var flags uint64
	if r.hasStep {
		flags |= spoolStep
	}
	if r.hasTime {
		flags |= spoolTime
	}
	for i, ok := range r.hasScalar {
		if ok {
			flags |= spoolScalar0 << i
		}
	}
	if r.hasActive {
		flags |= spoolActive
	}
	same := false
	if r.symbols != nil {
		flags |= spoolSymbols
		if w.syms != nil && slices.Equal(r.symbols, w.syms) {
			flags |= spoolSameSymbols
			same = true
		}
	}
	w.uvarint(flags)
	w.uvarint(uint64(r.line))
	if r.hasStep {
		w.buf = binary.AppendVarint(w.buf, r.step)
	}
	if r.hasTime {
		w.f64(r.time)
	}
	for i, ok := range r.hasScalar {
		if ok {
			w.f64(r.scalar[i])
		}
	}
	if r.hasActive {
		w.buf = binary.AppendVarint(w.buf, int64(r.active))
	}
	w.floats(r.stateE)
	w.floats(r.pop)
	if r.symbols != nil && !same {
		w.uvarint(uint64(len(r.symbols)))
		for _, s := range r.symbols {
			w.str(s)
		}
		w.syms = r.symbols
	}
	w.columns(r.atoms)
	w.columns(r.extras)
	n, err := w.bw.Write(w.buf)
	w.off += int64(n)
	if err != nil {
		w.err = err
	}
	return w.err
}

// errSpool marks a spool that does not read back as written.
var errSpool = errors.New("spool does not read back as written")

// spoolSource replays one source's records from its spool section, as
// the source gave them in the scan; what the source said at the end of
// the scan (formats, units, hops) comes from its FileReport.
type spoolSource struct {
	f    *os.File // closed by close (one of the sources sharing it)
	fr   *FileReport
	br   *bufio.Reader
	sec  *countingReader // under br: bytes taken from the section
	size int64           // the section's length
	strs []string
	syms []string
	buf  []byte
}

func newSpoolSource(f *os.File, sec [2]int64, fr *FileReport) *spoolSource {
	return spoolReader(io.NewSectionReader(f, sec[0], sec[1]), sec[1], fr)
}

// spoolReader reads records from r, a section of size bytes.
func spoolReader(r io.Reader, size int64, fr *FileReport) *spoolSource {
	cr := &countingReader{r: r}
	return &spoolSource{fr: fr, br: bufio.NewReaderSize(cr, 256<<10), sec: cr, size: size}
}

// countingReader counts the bytes read through it.
type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

// left is the number of bytes of the section not yet consumed.
func (s *spoolSource) left() int64 { return s.size - s.sec.n + int64(s.br.Buffered()) }

func (s *spoolSource) file() string                        { return s.fr.File }
func (s *spoolSource) provides() map[string]textnum.Format { return s.fr.fmts }
func (s *spoolSource) timeFormat() textnum.Format          { return s.fr.fmts[quantity.TimeQ] }
func (s *spoolSource) units() map[string]string            { return s.fr.units }
func (s *spoolSource) hops() []hop                         { return s.fr.hopEvents }
func (s *spoolSource) close() {
	if s.f != nil {
		s.f.Close()
	}
}

func (s *spoolSource) corrupt(what string, err error) error {
	if err == io.EOF {
		err = io.ErrUnexpectedEOF
	}
	return fmt.Errorf("%s: %w (%s: %w)", s.fr.File, errSpool, what, err)
}

func (s *spoolSource) uvarint(what string) (uint64, error) {
	x, err := binary.ReadUvarint(s.br)
	if err != nil {
		return 0, s.corrupt(what, err)
	}
	return x, nil
}

func (s *spoolSource) length(what string) (int, error) {
	x, err := s.uvarint(what)
	if err == nil && (x > maxSpoolLen || int64(x) > s.left()+1) {
		// +1: floats and scaled store n+1, so that nil and empty differ.
		err = s.corrupt(what, fmt.Errorf("length %d with %d bytes left", x, s.left()))
	}
	return int(x), err
}

func (s *spoolSource) f64(what string) (float64, error) {
	var b [8]byte
	if _, err := io.ReadFull(s.br, b[:]); err != nil {
		return 0, s.corrupt(what, err)
	}
	return math.Float64frombits(binary.LittleEndian.Uint64(b[:])), nil
}

// floats reads a nil-or-values block.
func (s *spoolSource) floats(what string) ([]float64, error) {
	n, err := s.length(what)
	if err != nil || n == 0 {
		return nil, err
	}
	return s.raw(what, n-1)
}

// raw reads n values as IEEE bits.
func (s *spoolSource) raw(what string, n int) ([]float64, error) {
	need := 8 * n
	if int64(need) > s.left() {
		return nil, s.corrupt(what, fmt.Errorf("%d values with %d bytes left", n, s.left()))
	}
	if cap(s.buf) < need {
		s.buf = make([]byte, need)
	}
	b := s.buf[:need]
	if _, err := io.ReadFull(s.br, b); err != nil {
		return nil, s.corrupt(what, err)
	}
	v := make([]float64, n)
	for i := range v {
		v[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return v, nil
}

// scaled reads the values of a per-atom column (spoolWriter.scaled).
func (s *spoolSource) scaled(what string) ([]float64, error) {
	n, err := s.length(what)
	if err != nil || n == 0 {
		return nil, err
	}
	n--
	enc, err := s.br.ReadByte()
	if err != nil {
		return nil, s.corrupt(what, err)
	}
	if enc == 0 {
		return s.raw(what, n)
	}
	d := int(enc) - 1
	if d >= len(exact10) {
		return nil, s.corrupt(what, fmt.Errorf("%d decimals", d))
	}
	size, err := s.length(what)
	if err != nil {
		return nil, err
	}
	if n > size { // every value takes at least one byte
		return nil, s.corrupt(what, fmt.Errorf("%d values in %d bytes", n, size))
	}
	if cap(s.buf) < size {
		s.buf = make([]byte, size)
	}
	b := s.buf[:size]
	if _, err := io.ReadFull(s.br, b); err != nil {
		return nil, s.corrupt(what, err)
	}
	p := exact10[d]
	v := make([]float64, n)
	for i := range v {
		// binary.Varint, inlined: this loop runs for every number.
		var u uint64
		var shift uint
		for {
			if len(b) == 0 || shift > 63 {
				return nil, s.corrupt(what, fmt.Errorf("value %d of %d", i+1, n))
			}
			c := b[0]
			b = b[1:]
			u |= uint64(c&0x7f) << shift
			if c < 0x80 {
				break
			}
			shift += 7
		}
		v[i] = float64(int64(u>>1)^-int64(u&1)) / p
	}
	if len(b) != 0 {
		return nil, s.corrupt(what, fmt.Errorf("%d bytes after %d values", len(b), n))
	}
	return v, nil
}

func (s *spoolSource) str(what string) (string, error) {
	k, err := s.uvarint(what)
	if err != nil {
		return "", err
	}
	if k > 0 {
		if k > uint64(len(s.strs)) {
			return "", s.corrupt(what, fmt.Errorf("string %d of %d", k, len(s.strs)))
		}
		return s.strs[k-1], nil
	}
	n, err := s.length(what)
	if err != nil {
		return "", err
	}
	b := make([]byte, n)
	if _, err := io.ReadFull(s.br, b); err != nil {
		return "", s.corrupt(what, err)
	}
	s.strs = append(s.strs, string(b))
	return s.strs[len(s.strs)-1], nil
}

func (s *spoolSource) columns(what string) ([]atomColumn, error) {
	n, err := s.length(what)
	if err != nil || n == 0 {
		return nil, err
	}
	cs := make([]atomColumn, n)
	for i := range cs {
		if cs[i].quantity, err = s.str(what); err != nil {
			return nil, err
		}
		if cs[i].values, err = s.scaled(what); err != nil {
			return nil, err
		}
	}
	return cs, nil
}

// next reads the next record; io.EOF at the end of the section.
func (s *spoolSource) next() (*record, error) {
	flags, err := binary.ReadUvarint(s.br)
	if err == io.EOF {
		return nil, io.EOF
	} else if err != nil {
		return nil, s.corrupt("flags", err)
	}
	r := &record{}
	line, err := s.uvarint("line")
	if err != nil {
		return nil, err
	}
	r.line = int(line)
	if flags&spoolStep != 0 {
		if r.step, err = binary.ReadVarint(s.br); err != nil {
			return nil, s.corrupt("step", err)
		}
		r.hasStep = true
	}
	if flags&spoolTime != 0 {
		if r.time, err = s.f64("time"); err != nil {
			return nil, err
		}
		r.hasTime = true
	}
	for i := range r.scalar {
		if flags&(spoolScalar0<<i) != 0 {
			if r.scalar[i], err = s.f64("scalar"); err != nil {
				return nil, err
			}
			r.hasScalar[i] = true
		}
	}
	if flags&spoolActive != 0 {
		a, err := binary.ReadVarint(s.br)
		if err != nil {
			return nil, s.corrupt("active state", err)
		}
		r.active, r.hasActive = int(a), true
	}
	if r.stateE, err = s.floats("state energies"); err != nil {
		return nil, err
	}
	if r.pop, err = s.floats("populations"); err != nil {
		return nil, err
	}
	switch {
	case flags&spoolSameSymbols != 0:
		if s.syms == nil {
			return nil, s.corrupt("symbols", errors.New("same as a record before the first"))
		}
		r.symbols = s.syms
	case flags&spoolSymbols != 0:
		n, err := s.length("symbols")
		if err != nil {
			return nil, err
		}
		r.symbols = make([]string, n)
		for i := range r.symbols {
			if r.symbols[i], err = s.str("symbols"); err != nil {
				return nil, err
			}
		}
		s.syms = r.symbols
	}
	if r.atoms, err = s.columns("per-atom columns"); err != nil {
		return nil, err
	}
	if r.extras, err = s.columns("extra columns"); err != nil {
		return nil, err
	}
	return r, nil
}
