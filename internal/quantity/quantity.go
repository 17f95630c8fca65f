// Package quantity is trajvault's one vocabulary: the quantities a log
// may hold, the names each kind of source uses for them, and the unit
// kinds (the classes of quantities that share one unit in the logs, as
// --unit KIND=UNIT and a recipe's units: section name them). Readers,
// scan, convert and the command-line flags ask this table; nothing else
// keeps a list of names or kinds.
package quantity

import (
	"fmt"
	"regexp"
	"strconv"
	"strings"

	"trajvault/internal/units"
)

// Kind is a unit kind.
type Kind string

// Unit kinds.
const (
	Position Kind = "position"
	Velocity Kind = "velocity"
	Force    Kind = "force"
	Momentum Kind = "momentum"
	Mass     Kind = "mass"
	Time     Kind = "time"
	Energy   Kind = "energy"
)

// KindInfo describes one unit kind.
type KindInfo struct {
	Kind Kind
	Dim  units.Dim
	// Example is a unit of this kind shown in messages.
	Example string
}

// kinds lists the unit kinds in the order messages list them.
var kinds = []KindInfo{
	{Position, units.Length, "angstrom"},
	{Velocity, units.Velocity, "angstrom fs-1"},
	{Force, units.Force, "hartree bohr-1"},
	{Momentum, units.Momentum, "u angstrom fs-1"},
	{Mass, units.Mass, "u"},
	{Time, units.Time, "fs"},
	{Energy, units.Energy, "hartree"},
}

// Kinds returns every unit kind, in a fixed order.
func Kinds() []KindInfo { return append([]KindInfo(nil), kinds...) }

// KindNames is the kinds as a comma-separated list, for messages.
func KindNames() string {
	var s []string
	for _, k := range kinds {
		s = append(s, string(k.Kind))
	}
	return strings.Join(s, ", ")
}

// LookupKind returns the unit kind named s.
func LookupKind(s string) (KindInfo, bool) {
	for _, k := range kinds {
		if string(k.Kind) == s {
			return k, true
		}
	}
	return KindInfo{}, false
}

// Quantity is one thing a log may hold.
type Quantity struct {
	Name string // as in recipes and log groups, e.g. "kinetic_energy"
	// Unit is the unit kind, or "" for counts and indices.
	Unit Kind
	// Element is the layout element that stores it, or "" when it is not
	// stored as an element of its own (step, momentum: see convert).
	Element string
	// PerAtom quantities are columns of the geometry file; PerState ones
	// carry a state index.
	PerAtom, PerState bool
	// StoredAs names the quantity it is converted to before storing, or
	// "" when it is stored as read.
	StoredAs string
	// Scalar is the per-frame energy slot (0 kinetic, 1 potential,
	// 2 total), or -1.
	Scalar int
	// Columns are the names of table columns (and XYZ comment keys) that
	// mean this quantity, compared after Normalize. For per-state
	// quantities they are prefixes followed by the state index.
	Columns []string
	// Properties are the extended-XYZ Properties names for per-atom
	// quantities, compared case-insensitively.
	Properties []string
	// CommentKeys are XYZ comment-line keys that mean this quantity there
	// although a table column of the same name means another (see
	// Ambiguous); compared case-insensitively.
	CommentKeys []string
}

// Quantity names.
const (
	Step            = "step"
	TimeQ           = "time"
	KineticEnergy   = "kinetic_energy"
	PotentialEnergy = "potential_energy"
	TotalEnergy     = "total_energy"
	ActiveState     = "active_state"
	StateEnergy     = "state_energy"
	Population      = "population"
	PositionQ       = "position"
	VelocityQ       = "velocity"
	ForceQ          = "force"
	MomentumQ       = "momentum"
	MassQ           = "mass"
	// Ignore, in a recipe's column map, says a column is not read.
	Ignore = "ignore"
)

// table is the vocabulary. Names are documented in README.md (Inputs).
//
// One name means different quantities in two kinds of source, by the
// convention of each: a table column "energy" or "e" is the total energy
// (the conserved quantity energy logs print beside Ekin and Epot), while
// energy= on an extended-XYZ comment line is the potential energy (the
// extended XYZ convention of ASE, common practice: the calculator's
// energy). Both readings are announced when such a name is read (see
// Ambiguous); a recipe's column map says otherwise.
var table = []Quantity{
	{Name: Step, Scalar: -1, Columns: []string{"step", "nstep", "istep", "steps"}},
	{Name: TimeQ, Unit: Time, Element: "time", Scalar: -1, Columns: []string{"time", "t", "simtime"}},
	{Name: KineticEnergy, Unit: Energy, Element: "kinetic_energy", Scalar: 0, Columns: []string{"ekin", "kinetic", "kineticenergy", "ke", "ek"}},
	{Name: PotentialEnergy, Unit: Energy, Element: "potential_energy", Scalar: 1, Columns: []string{"epot", "potential", "potentialenergy", "pe", "ep"}, CommentKeys: []string{"energy"}},
	{Name: TotalEnergy, Unit: Energy, Element: "total_energy", Scalar: 2, Columns: []string{"etot", "total", "totalenergy", "energy", "e", "etotal"}},
	{Name: ActiveState, Scalar: -1, Columns: []string{"state", "activestate", "surface", "istate", "currentstate", "active"}},
	{Name: StateEnergy, Unit: Energy, Element: "state_energies", PerState: true, Scalar: -1, Columns: []string{"e", "en", "energy", "v", "es", "estate"}},
	{Name: Population, Element: "populations", PerState: true, Scalar: -1, Columns: []string{"p", "pop", "population", "rho"}},
	{Name: PositionQ, Unit: Position, Element: "position", PerAtom: true, Scalar: -1, Properties: []string{"pos", "positions", "position"}},
	{Name: VelocityQ, Unit: Velocity, Element: "velocity", PerAtom: true, Scalar: -1, Properties: []string{"velo", "vel", "velocity", "velocities"}},
	{Name: ForceQ, Unit: Force, Element: "force", PerAtom: true, Scalar: -1, Properties: []string{"force", "forces", "frc"}},
	// Momenta are stored as velocities (p/m, masses in u). Their own unit
	// (--unit momentum=...) gives the unit of p/m; a velocity unit given
	// instead is taken as the unit of p/m (see StoredUnit).
	{Name: MomentumQ, Unit: Momentum, StoredAs: VelocityQ, PerAtom: true, Scalar: -1, Properties: []string{"momenta", "momentum"}},
	{Name: MassQ, Unit: Mass, PerAtom: true, Scalar: -1, Properties: []string{"mass", "masses"}},
}

// All returns the vocabulary.
func All() []Quantity { return append([]Quantity(nil), table...) }

// Names lists the quantities by name, for messages that say what is
// known (a user of the binary has no README at hand).
func Names() string {
	names := make([]string, len(table))
	for i, q := range table {
		names[i] = q.Name
	}
	return strings.Join(names, ", ")
}

// Lookup returns the quantity named name (e.g. "kinetic_energy").
func Lookup(name string) (Quantity, bool) {
	for _, q := range table {
		if q.Name == name {
			return q, true
		}
	}
	return Quantity{}, false
}

// UnitKind is the unit kind of quantity q, or "" (counts, indices,
// populations, unknown names).
func UnitKind(q string) Kind {
	x, _ := Lookup(q)
	return x.Unit
}

// StoredUnit is the unit kind a quantity needs before it can be stored:
// its own, or that of the quantity it is converted to (momenta need the
// velocity unit of p/m).
func StoredUnit(q string) Kind {
	x, _ := Lookup(q)
	if x.StoredAs != "" {
		return UnitKind(x.StoredAs)
	}
	return x.Unit
}

// Element is the layout element storing q, or "".
func Element(q string) string {
	x, _ := Lookup(q)
	return x.Element
}

// ScalarNames are the per-frame energies, by Scalar slot.
var ScalarNames = [3]string{KineticEnergy, PotentialEnergy, TotalEnergy}

// ScalarIndex is the energy slot of q, or -1.
func ScalarIndex(q string) int {
	if x, ok := Lookup(q); ok {
		return x.Scalar
	}
	return -1
}

var noise = strings.NewReplacer("_", "", "-", "", " ", "", ".", "")

// Normalize folds a name for matching: lower case, without '_', '-', '.'
// and spaces.
func Normalize(name string) string { return strings.ToLower(noise.Replace(name)) }

var stateCol = regexp.MustCompile(`^([a-z]+?)s?(\d+)$`)

// Column maps a table column name to a quantity and, for per-state
// quantities, the state index as written (not shifted to 0-based; -1
// otherwise). Unknown names give "".
func Column(name string) (string, int) {
	n := Normalize(name)
	for _, q := range table {
		if q.PerState {
			continue
		}
		for _, c := range q.Columns {
			if c == n {
				return q.Name, -1
			}
		}
	}
	if m := stateCol.FindStringSubmatch(n); m != nil {
		var k int
		fmt.Sscan(m[2], &k)
		for _, q := range table {
			if !q.PerState {
				continue
			}
			for _, c := range q.Columns {
				if c == m[1] {
					return q.Name, k
				}
			}
		}
	}
	return "", -1
}

// CommentKey maps a key of an XYZ comment line (key=value) to a
// quantity: the quantities' CommentKeys, then the column names (so
// "energy" is the potential energy there, the extended XYZ convention;
// see the table's doc).
func CommentKey(key string) string {
	for _, q := range table {
		for _, c := range q.CommentKeys {
			if strings.EqualFold(key, c) {
				return q.Name
			}
		}
	}
	q, _ := Column(key)
	return q
}

// Source kinds that name quantities, as Meaning and messages print them.
const (
	TableColumn = "table column"
	CommentLine = "XYZ comment key"
)

// Meaning is what a name means in one kind of source.
type Meaning struct {
	Source   string // TableColumn or CommentLine
	Quantity string
}

// Ambiguous returns what name means in each kind of source when that
// differs between them (e.g. "energy": total energy as a table column,
// potential energy as an XYZ comment key), else nil. A reader that takes
// such a name by its source's convention says so (it is never a silent
// choice).
func Ambiguous(name string) []Meaning {
	col, k := Column(name)
	key := CommentKey(name)
	if k >= 0 || col == key || col == "" || key == "" {
		return nil
	}
	return []Meaning{{TableColumn, col}, {CommentLine, key}}
}

// ambiguousNames lists every name Ambiguous reports, in table order.
func ambiguousNames() []string {
	var out []string
	for _, q := range table {
		for _, c := range q.CommentKeys {
			if Ambiguous(c) != nil {
				out = append(out, c)
			}
		}
	}
	return out
}

// Property maps an extended-XYZ Properties column name to a per-atom
// quantity, or "".
func Property(name string) string {
	l := strings.ToLower(name)
	for _, q := range table {
		for _, p := range q.Properties {
			if p == l {
				return q.Name
			}
		}
	}
	return ""
}

// Recipe is how a recipe's column map names a quantity: "kinetic_energy",
// "state_energy:1", or "ignore".
func Recipe(s string) (name string, state int, err error) {
	name, idx, hasIdx := strings.Cut(s, ":")
	state = -1
	if hasIdx {
		n, e := strconv.Atoi(idx)
		if e != nil || n < 0 {
			return "", 0, fmt.Errorf("bad state index in %q", s)
		}
		state = n
	}
	if name == Ignore {
		if hasIdx {
			return "", 0, fmt.Errorf("%s takes no state index", name)
		}
		return name, state, nil
	}
	q, ok := Lookup(name)
	if !ok || q.PerAtom {
		return "", 0, fmt.Errorf("unknown quantity %q", name)
	}
	switch {
	case q.PerState && !hasIdx:
		return "", 0, fmt.Errorf("%s needs a state index, e.g. %s:1", name, name)
	case !q.PerState && hasIdx:
		return "", 0, fmt.Errorf("%s takes no state index", name)
	}
	return name, state, nil
}

// Markdown is the vocabulary as a Markdown table (quantity, then the
// names each kind of source uses), for README.md. Comment keys are read
// for the step, the time and the energies.
func Markdown() string {
	var b strings.Builder
	b.WriteString("| quantity | table columns | XYZ comment keys | extended XYZ Properties |\n|---|---|---|---|\n")
	for _, q := range table {
		var cols, keys []string
		for _, c := range q.Columns {
			if q.PerState {
				c += "_K"
			}
			cols = append(cols, c)
		}
		if q.Name == Step || q.Name == TimeQ || q.Scalar >= 0 {
			for _, x := range table {
				for _, c := range x.Columns {
					if !x.PerState && CommentKey(c) == q.Name {
						keys = append(keys, c)
					}
				}
			}
		}
		fmt.Fprintf(&b, "| %s | %s | %s | %s |\n", q.Name, strings.Join(cols, ", "), strings.Join(keys, ", "), strings.Join(q.Properties, ", "))
	}
	for _, n := range ambiguousNames() {
		m := Ambiguous(n)
		fmt.Fprintf(&b, "\n`%s` means %s as a %s and %s as an %s (each the common convention of its kind of file); scan notes which it took, and a recipe's columns map says otherwise (e.g. `%s: %s`).\n",
			n, m[0].Quantity, m[0].Source, m[1].Quantity, m[1].Source, n, m[1].Quantity)
	}
	return b.String()
}
