package ingest

import (
	"errors"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"trajvault/internal/finding"
	"trajvault/internal/textnum"
)

// ErrNonFinite marks a NaN or Inf printed in a log.
var ErrNonFinite = errors.New("not a finite number (NaN or Inf): the run diverged or the log is corrupt")

func nonFinite(s string) bool {
	l := strings.ToLower(strings.TrimLeft(s, "+-"))
	return strings.HasPrefix(l, "nan") || strings.HasPrefix(l, "inf")
}

// SourceKind names the format of a source file, as reports print it
// (FileReport.Format).
type SourceKind string

// Source kinds of the built-in readers.
const (
	KindXYZ   SourceKind = "xyz"
	KindTable SourceKind = "table"
	KindLog   SourceKind = "log"
)

// Role is what the records of a source contribute to the frames.
type Role int

const (
	// RoleGeometry sources give per-atom frames (symbols and columns);
	// their records are the frames of the trajectory. A trajectory has
	// exactly one.
	RoleGeometry Role = iota + 1
	// RoleRecords sources give per-frame records (step, time, energies,
	// states) that are joined to the frames by step, or by order when
	// there are no steps.
	RoleRecords
)

// Reader is one input format: the one registration point of a reader
// (see readers). Scan, Convert and Discover know formats only through it.
type Reader struct {
	Kind SourceKind
	Role Role
	// Extensions Discover and TrajectoryFrom give to this reader (lower
	// case, with the dot).
	Extensions []string
	// Fallback marks the reader TrajectoryFrom uses for a file whose
	// extension no reader claims.
	Fallback bool
	// Probe, when set, is a cheap check that a file is of this format; a
	// file failing it is skipped with a note (P10), not an error.
	Probe func(path string) error
	// Events marks readers whose files may hold events (hops) after the
	// last frame: Convert reads them to the end.
	Events bool
	// ProvenanceRole is the role of its files in the provenance record.
	ProvenanceRole string
	// Open opens path. spec is the recipe entry that named the file (nil
	// when it was found by extension); rc is the recipe, or nil.
	Open func(path string, spec any, rc *Recipe) (source, error)
}

// readerFor is the reader claiming extension ext (lower case, with the
// dot), or nil.
func readerFor(ext string) *Reader {
	for _, r := range readers {
		for _, e := range r.Extensions {
			if e == ext {
				return r
			}
		}
	}
	return nil
}

func fallbackReader() *Reader {
	for _, r := range readers {
		if r.Fallback {
			return r
		}
	}
	return nil
}

// rank orders readers as registered, so that sources open in a fixed
// order (the geometry first).
func rank(r *Reader) int {
	for i, x := range readers {
		if x == r {
			return i
		}
	}
	return len(readers)
}

// knownExtensions lists every extension a reader claims, for messages.
func knownExtensions() string {
	var s []string
	for _, r := range readers {
		s = append(s, r.Extensions...)
	}
	sort.Strings(s)
	return strings.Join(s, " ")
}

// Input is one file of a trajectory and the reader that reads it.
type Input struct {
	Path   string     `json:"path"`
	Format SourceKind `json:"format"`
	reader *Reader
	spec   any
}

func newInput(path string, r *Reader, spec any) Input {
	return Input{Path: path, Format: r.Kind, reader: r, spec: spec}
}

func sortInputs(in []Input) {
	sort.SliceStable(in, func(i, j int) bool { return rank(in[i].reader) < rank(in[j].reader) })
}

func extOf(path string) string { return strings.ToLower(filepath.Ext(path)) }

// record is one time point read from one source. Per-state slices are
// indexed by state as written in the log (shifted later by state_base).
type record struct {
	line      int
	step      int64
	hasStep   bool
	time      float64
	hasTime   bool
	scalar    [3]float64 // kinetic, potential, total energy (quantity.ScalarNames)
	hasScalar [3]bool
	stateE    []float64
	pop       []float64
	active    int
	hasActive bool
	// Per-atom records (RoleGeometry): chemical symbols and the columns
	// whose quantity the source knows.
	symbols []string
	atoms   []atomColumn
	// extras are the numeric per-atom columns no quantity names, kept
	// as extra particle elements (quantity name ExtraPrefix + column).
	extras []atomColumn
}

// ExtraPrefix marks, in scan's quantities and formats, a per-atom
// column stored as an extra particle element under its own name
// (e.g. "extra:tags" is /particles/all/tags), without a unit.
const ExtraPrefix = "extra:"

// extra returns the values of the extra per-atom column name, or nil.
func (r *record) extra(name string) []float64 {
	for _, c := range r.extras {
		if c.quantity == name {
			return c.values
		}
	}
	return nil
}

// atomColumn is one per-atom quantity of a frame, flattened row-major.
type atomColumn struct {
	quantity string
	values   []float64
	// dec is D+1 when the reader saw every value printed in fixed
	// notation with at most D decimals, else 0 (the spool writes such
	// columns without a check per value, spoolWriter.scaled).
	dec int
}

// atom returns the values of per-atom quantity q, or nil.
func (r *record) atom(q string) []float64 {
	for _, c := range r.atoms {
		if c.quantity == q {
			return c.values
		}
	}
	return nil
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
	// provides are the quantities this source has given so far, each with
	// its printed format (the widest seen).
	provides() map[string]textnum.Format
	// timeFormat is the printed format of the time so far, cheaply (it
	// is consulted for every record).
	timeFormat() textnum.Format
	// units are the units per unit kind the file itself declares.
	units() map[string]string
	hops() []hop
	close()
}

// recycler is implemented by sources that can reuse the buffers of the
// record they returned last. Scan calls recycle when it is done with a
// record (it keeps nothing of it); the conversion pass, which hands
// records on, never does.
type recycler interface {
	recycle()
}

// reporter is implemented by sources that say, after a pass, what they
// read but do not store and which names they took by convention. It is
// optional so that the shared source interface stays as it is.
type reporter interface {
	report() []sourceNote
}

// sourceNote is one such statement; scan turns it into a finding.
type sourceNote struct {
	code      string
	sev       finding.Severity
	line, col int
	quantity  string
	msg       string
	// notStored, when set, is the entry for the not-stored list of
	// scan, convert and the provenance.
	notStored string
}

// notes collects sourceNotes, each key once.
type notes struct {
	list []sourceNote
	seen map[string]bool
}

func (n *notes) add(key string, sn sourceNote) {
	if n.seen == nil {
		n.seen = map[string]bool{}
	}
	if n.seen[key] {
		return
	}
	n.seen[key] = true
	n.list = append(n.list, sn)
}

func (n *notes) report() []sourceNote { return n.list }

// formatSet accumulates printed formats per quantity.
type formatSet map[string]textnum.Format

func (m formatSet) merge(q string, f textnum.Format) {
	if old, ok := m[q]; ok {
		m[q] = old.Merge(f)
	} else {
		m[q] = f
	}
}
