package export

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"trajvault/internal/elements"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// Selection is a window of an archive as a user writes it on the command
// line. Indices count from 0 (as HDF5 and NumPy index); empty fields
// select everything.
type Selection struct {
	// Frames is "N" (one frame) or "START:STOP[:STRIDE]" with STOP
	// excluded and empty parts meaning the ends, as in Python slices;
	// negative indices count from the end.
	Frames string
	// Time is "T0:T1[:DT]" in time units, e.g. "10fs:20fs" or
	// "0:1:0.1ps" (a unit written on any part applies to parts without
	// one): the frames with T0 <= t < T1, and with DT the first frame at
	// or after each T0 + k DT.
	Time string
	// Atoms is a comma-separated list of indices, inclusive ranges
	// "A-B" and element symbols, e.g. "0-2,7,H".
	Atoms string
	// Quantities are names from QuantityNames; nil picks the format's
	// default set.
	Quantities []string
	// States is a comma-separated list of electronic-state indices and
	// ranges "A-B" (0-based, as stored); it subsets state energies,
	// populations, amplitudes, couplings and hops.
	States string
	// Group is the particle group to read (a name under /particles);
	// "" is the file's default group (trajfile.ReadOptions). It chooses
	// where the data come from, not a subset, so Empty ignores it.
	Group string
}

// Empty reports whether nothing was selected (the whole file).
func (s Selection) Empty() bool {
	return s.Frames == "" && s.Time == "" && s.Atoms == "" && len(s.Quantities) == 0 && s.States == ""
}

// SelectionError is a selection that does not fit the file: a usage
// error. Msg says what the file holds.
type SelectionError struct {
	Flag  string // e.g. "--frames"
	Value string
	Msg   string
}

func (e *SelectionError) Error() string {
	return fmt.Sprintf("%s %q: %s", e.Flag, e.Value, e.Msg)
}

// ErrSelection is wrapped by every SelectionError (errors.Is).
var ErrSelection = errors.New("selection outside the data")

func (e *SelectionError) Unwrap() error { return ErrSelection }

// kind is how a quantity's trailing dimensions are indexed.
type kind int

const (
	perFrame     kind = iota // [T]
	perAtom                  // [T][N][3]
	perState                 // [T][S]
	perStatePair             // [T][S][S]
	perStateReIm             // [T][S][2]
	eventTable               // hops
)

// quantityDef names one selectable quantity.
type quantityDef struct {
	name string
	kind kind
	path func(r *trajfile.Reader) string
}

func particle(el string) func(r *trajfile.Reader) string {
	return func(r *trajfile.Reader) string { return r.Particle(el) }
}

func fixed(p string) func(r *trajfile.Reader) string {
	return func(*trajfile.Reader) string { return p }
}

// quantityDefs are the selectable quantities, in output order.
var quantityDefs = []quantityDef{
	{"position", perAtom, particle(trajfile.Position)},
	{"velocity", perAtom, particle(trajfile.Velocity)},
	{"force", perAtom, particle(trajfile.Force)},
	{"kinetic_energy", perFrame, fixed(trajfile.KineticEnergy)},
	{"potential_energy", perFrame, fixed(trajfile.PotentialEnergy)},
	{"total_energy", perFrame, fixed(trajfile.TotalEnergy)},
	{"active_state", perFrame, fixed(trajfile.ActiveState)},
	{"state_energies", perState, fixed(trajfile.StateEnergies)},
	{"populations", perState, fixed(trajfile.Populations)},
	{"amplitudes", perStateReIm, fixed(trajfile.Amplitudes)},
	{"couplings", perStatePair, fixed(trajfile.Couplings)},
	{"hops", eventTable, fixed(trajfile.HopsGroup)},
}

// QuantityNames lists every quantity name a selection may use.
func QuantityNames() []string {
	out := make([]string, len(quantityDefs))
	for i, d := range quantityDefs {
		out[i] = d.name
	}
	return out
}

// quantity is a selected quantity resolved against a file.
type quantity struct {
	def  quantityDef
	el   *trajfile.Element // nil for hops
	keep [][]int           // per trailing dimension; nil = all
	dims []int             // selected per-frame dimensions
	// labels name each selected value of a frame, e.g. "0_x".
	labels []string
}

func (q *quantity) width() int { return len(q.labels) }

func (q *quantity) integer() bool { return q.el != nil && trajfile.IntegerValued(q.el.Path) }

// append prints v as recorded (see column.append).
func (q *quantity) append(b []byte, v float64) []byte {
	switch {
	case q.integer():
		return strconv.AppendInt(b, int64(v), 10)
	case q.el.Exact:
		return q.el.Format.Append(b, v)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64)
}

// appendJSON prints v as a JSON number with the recorded digits: the
// exponent letter becomes 'e' (JSON allows only e/E, RFC 8259 section 6);
// non-finite values, which JSON cannot hold, become null.
func (q *quantity) appendJSON(b []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return append(b, "null"...)
	}
	if !q.integer() && q.el.Exact && q.el.Format.Exp {
		f := q.el.Format
		f.ExpChar = 'e'
		return f.Append(b, v)
	}
	return q.append(b, v)
}

// plan is a selection resolved against one open file.
type plan struct {
	r   *trajfile.Reader
	sel Selection
	// clock holds the steps and times of the selected frames only,
	// indexed like frames.
	clock  *clockColumns
	frames []int
	atoms  []int // nil = all
	states []int // nil = all
	qs     []*quantity
	hops   []trajfile.Hop // when hops are selected
	wantH  bool
}

// resolve checks sel against r and lists what it selects. defaults are
// the quantities used when sel names none (those absent from the file
// are skipped).
func resolve(r *trajfile.Reader, sel Selection, defaults []string) (*plan, error) {
	p := &plan{r: r, sel: sel}
	var err error
	switch {
	case sel.Frames != "" && sel.Time != "":
		return nil, &SelectionError{"--time", sel.Time, "give frames by index (--frames) or by time (--time), not both"}
	case sel.Time != "":
		p.frames, err = timeFrames(r, sel.Time)
	default:
		p.frames, err = indexFrames(r, sel.Frames)
	}
	if err != nil {
		return nil, err
	}
	if p.clock, err = clockAt(r, p.frames); err != nil {
		return nil, err
	}
	if p.atoms, err = parseAtoms(r, sel.Atoms); err != nil {
		return nil, err
	}
	if p.states, err = parseStates(r, sel.States); err != nil {
		return nil, err
	}
	names := sel.Quantities
	explicit := len(names) > 0
	if !explicit {
		names = defaults
	}
	seen := map[string]bool{}
	for _, n := range names {
		n = strings.TrimSpace(n)
		if seen[n] {
			continue
		}
		seen[n] = true
		q, err := p.quantity(n, explicit)
		if err != nil {
			return nil, err
		}
		if q != nil {
			p.qs = append(p.qs, q)
		}
	}
	if len(p.qs) == 0 && !p.wantH {
		return nil, &SelectionError{"--quantities", strings.Join(names, ","), "none of these is stored; the file stores " + strings.Join(present(r), ", ")}
	}
	return p, nil
}

// present lists the quantities r stores.
func present(r *trajfile.Reader) []string {
	var out []string
	for _, d := range quantityDefs {
		if d.kind == eventTable {
			if h, err := r.Hops(); err == nil && h != nil {
				out = append(out, d.name)
			}
			continue
		}
		if r.Has(d.path(r)) {
			out = append(out, d.name)
		}
	}
	return out
}

// quantity resolves one name; absent quantities are an error when the
// user named them, else skipped.
func (p *plan) quantity(name string, explicit bool) (*quantity, error) {
	i := slices.IndexFunc(quantityDefs, func(d quantityDef) bool { return d.name == name })
	if i < 0 {
		return nil, &SelectionError{"--quantities", name, "unknown quantity; known: " + strings.Join(QuantityNames(), ", ") + "; this file stores " + strings.Join(present(p.r), ", ")}
	}
	def := quantityDefs[i]
	// absent lists what the file stores, which reads every element (and
	// the hops table): only for the error message.
	absent := func() error {
		return &SelectionError{"--quantities", name, "the file stores no " + name + "; it stores " + strings.Join(present(p.r), ", ")}
	}
	if def.kind == eventTable {
		h, err := p.r.Hops()
		if err != nil {
			return nil, fmt.Errorf("%s: hops: %w", p.r.Path, err)
		}
		if h == nil {
			if explicit {
				return nil, absent()
			}
			return nil, nil
		}
		p.hops, p.wantH = p.selectHops(h), true
		return nil, nil
	}
	el, err := p.r.Element(def.path(p.r))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", p.r.Path, err)
	}
	if el == nil {
		if explicit {
			return nil, absent()
		}
		return nil, nil
	}
	q := &quantity{def: def, el: el}
	trailing := el.Shape.Dims[1:]
	want := map[kind]int{perFrame: 0, perAtom: 2, perState: 1, perStatePair: 2, perStateReIm: 2}[def.kind]
	if len(trailing) != want {
		return nil, fmt.Errorf("%s: %s has shape %v, want %d dimensions after time", p.r.Path, el.Path, el.Shape.Dims, want+1)
	}
	idx := func(d int, keep []int) []int {
		if keep != nil {
			return keep
		}
		return seq(trailing[d])
	}
	switch def.kind {
	case perAtom:
		if trailing[0] != p.r.N {
			return nil, fmt.Errorf("%s: %s has %d atoms, the file %d", p.r.Path, el.Path, trailing[0], p.r.N)
		}
		q.keep = [][]int{p.atoms}
		for _, a := range idx(0, p.atoms) {
			for k := 0; k < trailing[1]; k++ {
				q.labels = append(q.labels, fmt.Sprintf("%d_%c", a, "xyz"[min(k, 2)]))
			}
		}
	case perState, perStatePair, perStateReIm:
		if p.states != nil && trailing[0] != p.r.States {
			return nil, fmt.Errorf("%s: %s has %d states, the file %d", p.r.Path, el.Path, trailing[0], p.r.States)
		}
		q.keep = [][]int{p.states}
		if def.kind == perStatePair {
			q.keep = append(q.keep, p.states)
		}
		for _, s := range idx(0, p.states) {
			switch def.kind {
			case perState:
				q.labels = append(q.labels, strconv.Itoa(s))
			case perStateReIm:
				q.labels = append(q.labels, fmt.Sprintf("%d_re", s), fmt.Sprintf("%d_im", s))
			case perStatePair:
				for _, s2 := range idx(1, p.states) {
					q.labels = append(q.labels, fmt.Sprintf("%d_%d", s, s2))
				}
			}
		}
	default:
		q.labels = []string{""}
	}
	for d := range trailing {
		var k []int
		if d < len(q.keep) {
			k = q.keep[d]
		}
		q.dims = append(q.dims, len(idx(d, k)))
	}
	return q, nil
}

// selectHops keeps the hops from the first to the last selected frame's
// step (inclusive) between selected states.
func (p *plan) selectHops(all []trajfile.Hop) []trajfile.Hop {
	lo, hi := p.clock.c.Steps[0], p.clock.c.Steps[len(p.frames)-1]
	out := []trajfile.Hop{}
	for _, h := range all {
		if h.Step < lo || h.Step > hi {
			continue
		}
		if p.states != nil && (!slices.Contains(p.states, h.From) || !slices.Contains(p.states, h.To)) {
			continue
		}
		out = append(out, h)
	}
	return out
}

func seq(n int) []int {
	out := make([]int, n)
	for i := range out {
		out[i] = i
	}
	return out
}

// clockAt reads the clock of the given frames, with the recorded format
// of the times.
func clockAt(r *trajfile.Reader, frames []int) (*clockColumns, error) {
	pos := r.Particle(trajfile.Position)
	c, err := r.ClockAt(pos, frames)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", r.Path, err)
	}
	cc := &clockColumns{c: c}
	cc.time, cc.ok = r.TimeFormat(pos)
	return cc, nil
}

// frameRange describes the file's frames for error messages.
func frameRange(r *trajfile.Reader) string {
	if r.T == 0 {
		return "the file has no frames"
	}
	s := fmt.Sprintf("the file has %d frames, 0..%d", r.T, r.T-1)
	if cc, err := clockAt(r, []int{0, r.T - 1}[:min(r.T, 2)]); err == nil {
		s += fmt.Sprintf(" (steps %d..%d)", cc.c.Steps[0], cc.c.Steps[len(cc.c.Steps)-1])
	}
	return s
}

// indexFrames parses a frame slice (see Selection.Frames).
func indexFrames(r *trajfile.Reader, spec string) ([]int, error) {
	T := r.T
	bad := func(msg string) error { return &SelectionError{"--frames", spec, msg} }
	if T == 0 {
		return nil, bad(frameRange(r))
	}
	if spec == "" {
		return seq(T), nil
	}
	parts := strings.Split(spec, ":")
	if len(parts) > 3 {
		return nil, bad("expected N or START:STOP[:STRIDE], e.g. 100:200:10")
	}
	num := func(s string, def int) (int, error) {
		s = strings.TrimSpace(s)
		if s == "" {
			return def, nil
		}
		v, err := strconv.Atoi(s)
		if err != nil {
			return 0, bad(fmt.Sprintf("%q is not a whole number; expected N or START:STOP[:STRIDE], e.g. 100:200:10", s))
		}
		if v < 0 {
			v += T
			if v < 0 {
				return 0, bad(fmt.Sprintf("%s counts back past frame 0; %s", s, frameRange(r)))
			}
		}
		return v, nil
	}
	start, err := num(parts[0], 0)
	if err != nil {
		return nil, err
	}
	if len(parts) == 1 {
		if strings.TrimSpace(parts[0]) == "" {
			return nil, bad("empty; expected N or START:STOP[:STRIDE]")
		}
		if start >= T {
			return nil, bad(fmt.Sprintf("frame %d is beyond the end; %s", start, frameRange(r)))
		}
		return []int{start}, nil
	}
	stop, err := num(parts[1], T)
	if err != nil {
		return nil, err
	}
	stride := 1
	if len(parts) == 3 && strings.TrimSpace(parts[2]) != "" {
		if stride, err = strconv.Atoi(strings.TrimSpace(parts[2])); err != nil || stride < 1 {
			return nil, bad("the stride must be a positive whole number of frames, e.g. 0:1000:10")
		}
	}
	switch {
	case start >= T:
		return nil, bad(fmt.Sprintf("start %d is beyond the end; %s", start, frameRange(r)))
	case stop > T:
		return nil, bad(fmt.Sprintf("stop %d is beyond the end (stop is excluded, so at most %d); %s", stop, T, frameRange(r)))
	case stop <= start:
		return nil, bad(fmt.Sprintf("selects no frame (stop %d is not after start %d); %s", stop, start, frameRange(r)))
	}
	out := make([]int, 0, (stop-start+stride-1)/stride)
	for f := start; f < stop; f += stride {
		out = append(out, f)
	}
	return out, nil
}

// splitUnit splits "12.5fs" into 12.5 and "fs"; the unit may be any unit
// the units package reads (e.g. "ps", "au_time").
func splitUnit(s string) (float64, string, error) {
	s = strings.TrimSpace(s)
	i := 0
	for i < len(s) && strings.IndexByte("0123456789.+-eE", s[i]) >= 0 {
		// an 'e' followed by a letter starts a unit, not an exponent
		if (s[i] == 'e' || s[i] == 'E') && (i+1 >= len(s) || strings.IndexByte("0123456789+-", s[i+1]) < 0) {
			break
		}
		i++
	}
	v, err := strconv.ParseFloat(s[:i], 64)
	if err != nil {
		return 0, "", fmt.Errorf("%q is not a number with an optional unit, e.g. 12.5fs", s)
	}
	return v, strings.TrimSpace(s[i:]), nil
}

// timeFrames parses a time window (see Selection.Time) and lists its
// frames. Times compare in the stored time unit with a tolerance of 1e-6 of the
// smallest frame spacing, so that "0.15fs" finds a frame stored as
// 0.15000000000000002 fs.
func timeFrames(r *trajfile.Reader, spec string) ([]int, error) {
	bad := func(msg string) error { return &SelectionError{"--time", spec, msg} }
	// A time window needs every frame's time: the whole clock is read.
	cc, err := readClock(r)
	if err != nil {
		return nil, err
	}
	have := func() string {
		if r.T == 0 {
			return "the file has no frames"
		}
		c := cc.c
		return fmt.Sprintf("the file's times run %s..%s %s over %d frames", cc.appendTime(nil, 0), cc.appendTime(nil, r.T-1), c.TimeUnit, r.T)
	}
	parts := strings.Split(spec, ":")
	if len(parts) < 2 || len(parts) > 3 {
		return nil, bad("expected T0:T1[:DT] with a time unit, e.g. 10fs:20fs or 0:1:0.1ps; " + have())
	}
	vals := make([]float64, len(parts))
	unitsOf := make([]string, len(parts))
	given := make([]bool, len(parts))
	common := ""
	for i, s := range parts {
		if strings.TrimSpace(s) == "" {
			continue
		}
		v, u, err := splitUnit(s)
		if err != nil {
			return nil, bad(err.Error())
		}
		vals[i], unitsOf[i], given[i] = v, u, true
		if u != "" {
			common = u
		}
	}
	if common == "" {
		return nil, bad("give a time unit, e.g. " + strings.TrimSuffix(spec, ":") + "fs; " + have())
	}
	for i := range vals {
		u := unitsOf[i]
		if u == "" {
			u = common
		}
		if !given[i] {
			continue
		}
		f, err := units.Factor(u, cc.c.TimeUnit)
		if err != nil {
			return nil, bad(fmt.Sprintf("%q is not a time unit (%v)", u, err))
		}
		vals[i] *= f
	}
	if r.T == 0 {
		return nil, bad(have())
	}
	times := cc.c.Times // in the stored unit, like vals
	spacing := math.Inf(1)
	for i := 1; i < len(times); i++ {
		if d := times[i] - times[i-1]; d > 0 {
			spacing = min(spacing, d)
		}
	}
	tol := 1e-6 * spacing
	if math.IsInf(spacing, 1) {
		tol = 1e-9 * max(math.Abs(times[0]), 1e-30)
	}
	t0, t1 := times[0], math.Inf(1)
	if given[0] {
		t0 = vals[0]
	}
	if given[1] {
		t1 = vals[1]
	}
	dt := 0.0
	if len(parts) == 3 && given[2] {
		if dt = vals[2]; dt <= 0 {
			return nil, bad("the time stride must be positive")
		}
	}
	var out []int
	target := t0
	for i, t := range times {
		if t >= t1-tol {
			break
		}
		if t < target-tol {
			continue
		}
		out = append(out, i)
		if dt > 0 {
			target = t0 + (math.Floor((t-t0+tol)/dt)+1)*dt
		}
	}
	if len(out) == 0 {
		return nil, bad("selects no frame; " + have())
	}
	return out, nil
}

// parseList parses comma-separated indices and inclusive ranges "A-B";
// other tokens go to word (which returns the indices they name).
func parseList(spec, flag string, n int, what, have string, word func(string) ([]int, error)) ([]int, error) {
	bad := func(msg string) error { return &SelectionError{flag, spec, msg} }
	set := map[int]bool{}
	for _, tok := range strings.Split(spec, ",") {
		tok = strings.TrimSpace(tok)
		if tok == "" {
			return nil, bad("empty item; expected a comma-separated list, e.g. 0-2,5")
		}
		var lo, hi int
		a, b, isRange := strings.Cut(tok, "-")
		x, errA := strconv.Atoi(a)
		switch {
		case isRange && errA == nil:
			y, err := strconv.Atoi(b)
			if err != nil || y < x {
				return nil, bad(fmt.Sprintf("%q is not a range A-B with A <= B", tok))
			}
			lo, hi = x, y
		case !isRange && errA == nil:
			lo, hi = x, x
		default:
			if word == nil {
				return nil, bad(fmt.Sprintf("%q is not a %s index; %s", tok, what, have))
			}
			idx, err := word(tok)
			if err != nil {
				return nil, err
			}
			for _, i := range idx {
				set[i] = true
			}
			continue
		}
		if lo < 0 || hi >= n {
			return nil, bad(fmt.Sprintf("%s %d does not exist; %s", what, max(hi, 0), have))
		}
		for i := lo; i <= hi; i++ {
			set[i] = true
		}
	}
	out := make([]int, 0, len(set))
	for i := range set {
		out = append(out, i)
	}
	slices.Sort(out)
	return out, nil
}

// parseAtoms resolves Selection.Atoms; nil means every atom.
func parseAtoms(r *trajfile.Reader, spec string) ([]int, error) {
	if spec == "" {
		return nil, nil
	}
	syms := make([]string, r.N)
	for i := range syms {
		syms[i] = r.Symbol(i)
	}
	have := fmt.Sprintf("the file has %d atoms, 0..%d (%s)", r.N, r.N-1, abbreviate(syms, 12))
	if r.N == 0 {
		have = "the file has no atoms"
	}
	return parseList(spec, "--atoms", r.N, "atom", have, func(tok string) ([]int, error) {
		var idx []int
		for i, s := range syms {
			if s == tok {
				idx = append(idx, i)
			}
		}
		if len(idx) == 0 {
			msg := fmt.Sprintf("no atom is %s; %s", tok, have)
			if elements.Number(tok) <= 0 {
				msg = fmt.Sprintf("%q is neither an atom index, a range A-B nor an element symbol; %s", tok, have)
			}
			return nil, &SelectionError{"--atoms", spec, msg}
		}
		return idx, nil
	})
}

// parseStates resolves Selection.States; nil means every state.
func parseStates(r *trajfile.Reader, spec string) ([]int, error) {
	if spec == "" {
		return nil, nil
	}
	have := fmt.Sprintf("the file has %d electronic states, 0..%d", r.States, r.States-1)
	if r.States == 0 {
		return nil, &SelectionError{"--states", spec, "the file records no electronic states (/parameters/n_states)"}
	}
	return parseList(spec, "--states", r.States, "state", have, nil)
}

// abbreviate joins up to n items, then says how many more there are.
func abbreviate(s []string, n int) string {
	if len(s) <= n {
		return strings.Join(s, " ")
	}
	return strings.Join(s[:n], " ") + fmt.Sprintf(" and %d more", len(s)-n)
}
