package quantity

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"testing"

	"trajvault/internal/units"
)

// TestExamplesHaveTheirDimension: every kind's example unit parses (H5MD
// 1.1 unit grammar) to the kind's dimension.
func TestExamplesHaveTheirDimension(t *testing.T) {
	for _, k := range Kinds() {
		u, err := units.Parse(k.Example)
		if err != nil || !u.Is(k.Dim) {
			t.Errorf("%s: example %q: %v, dimension %v", k.Kind, k.Example, err, u.Dim)
		}
	}
}

// TestRecipeSchemaKinds: the recipe schema's units section names exactly
// the unit kinds of the table.
func TestRecipeSchemaKinds(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "schema", "recipe.schema.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Defs map[string]struct {
			Properties map[string]any `json:"properties"`
		} `json:"$defs"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	var schema, ours []string
	for k := range doc.Defs["units"].Properties {
		schema = append(schema, k)
	}
	for _, k := range Kinds() {
		ours = append(ours, string(k.Kind))
	}
	sort.Strings(schema)
	sort.Strings(ours)
	if len(schema) == 0 || len(schema) != len(ours) {
		t.Fatalf("schema kinds %v, table kinds %v", schema, ours)
	}
	for i := range ours {
		if schema[i] != ours[i] {
			t.Errorf("schema kinds %v, table kinds %v", schema, ours)
		}
	}
}

// TestNames: what each kind of source means by a name.
func TestNames(t *testing.T) {
	columns := []struct {
		name  string
		want  string
		state int
	}{
		{"Epot", PotentialEnergy, -1},
		{"E_kin", KineticEnergy, -1},
		{"t", TimeQ, -1},
		// A table's bare energy column is the total energy (unchanged
		// meaning, see the table's doc); on a comment line it is the
		// potential energy (below).
		{"energy", TotalEnergy, -1},
		{"E", TotalEnergy, -1},
		{"E_1", StateEnergy, 1},
		{"E_S2", StateEnergy, 2},
		{"pop_0", Population, 0},
		{"state", ActiveState, -1},
		{"pos", "", -1}, // a per-atom name is not a column name
		{"xyz", "", -1},
	}
	for _, c := range columns {
		if q, k := Column(c.name); q != c.want || k != c.state {
			t.Errorf("Column(%q) = %q %d, want %q %d", c.name, q, k, c.want, c.state)
		}
	}
	// Extended XYZ comment lines (common practice: the energy= key of
	// files written by general-purpose tools is the calculator's
	// potential energy).
	for key, want := range map[string]string{"energy": PotentialEnergy, "Energy": PotentialEnergy, "time": TimeQ, "step": Step, "Etot": TotalEnergy} {
		if got := CommentKey(key); got != want {
			t.Errorf("CommentKey(%q) = %q, want %q", key, got, want)
		}
	}
	for name, want := range map[string]string{"pos": PositionQ, "velo": VelocityQ, "forces": ForceQ, "momenta": MomentumQ, "masses": MassQ, "tags": ""} {
		if got := Property(name); got != want {
			t.Errorf("Property(%q) = %q, want %q", name, got, want)
		}
	}
}

// TestNoNameTwice: within one kind of source a name means one quantity.
func TestNoNameTwice(t *testing.T) {
	seen := map[[2]string]string{}
	for _, q := range All() {
		group := "column"
		if q.PerState {
			group = "state prefix"
		}
		for _, n := range q.Columns {
			if n != Normalize(n) {
				t.Errorf("%s: column name %q is not normalised", q.Name, n)
			}
			if prev, dup := seen[[2]string{group, n}]; dup {
				t.Errorf("%s %q means %s and %s", group, n, prev, q.Name)
			}
			seen[[2]string{group, n}] = q.Name
		}
		for _, n := range q.Properties {
			if prev, dup := seen[[2]string{"property", n}]; dup {
				t.Errorf("property %q means %s and %s", n, prev, q.Name)
			}
			seen[[2]string{"property", n}] = q.Name
		}
		if q.Unit != "" {
			if _, ok := LookupKind(string(q.Unit)); !ok {
				t.Errorf("%s: unknown unit kind %q", q.Name, q.Unit)
			}
		}
	}
}

// TestStoredUnit: momenta are stored as p/m, so they need a velocity
// unit; other quantities need their own.
func TestStoredUnit(t *testing.T) {
	for q, want := range map[string]Kind{MomentumQ: Velocity, StateEnergy: Energy, PositionQ: Position, Step: "", Population: ""} {
		if got := StoredUnit(q); got != want {
			t.Errorf("StoredUnit(%s) = %q, want %q", q, got, want)
		}
	}
}

func TestRecipe(t *testing.T) {
	for _, c := range []struct {
		in    string
		name  string
		state int
		ok    bool
	}{
		{"kinetic_energy", KineticEnergy, -1, true},
		{"state_energy:1", StateEnergy, 1, true},
		{"ignore", Ignore, -1, true},
		{"state_energy", "", 0, false},
		{"time:1", "", 0, false},
		{"population:-1", "", 0, false},
		{"position", "", 0, false},
		{"speed", "", 0, false},
	} {
		name, k, err := Recipe(c.in)
		if (err == nil) != c.ok || name != c.name || (c.ok && k != c.state) {
			t.Errorf("Recipe(%q) = %q %d %v", c.in, name, k, err)
		}
	}
}

// The README table of names is this output (table columns match after
// Normalize; _K stands for a state index).
func ExampleMarkdown() {
	fmt.Print(Markdown())
	// Output:
	// | quantity | table columns | XYZ comment keys | extended XYZ Properties |
	// |---|---|---|---|
	// | step | step, nstep, istep, steps | step, nstep, istep, steps |  |
	// | time | time, t, simtime | time, t, simtime |  |
	// | kinetic_energy | ekin, kinetic, kineticenergy, ke, ek | ekin, kinetic, kineticenergy, ke, ek |  |
	// | potential_energy | epot, potential, potentialenergy, pe, ep | epot, potential, potentialenergy, pe, ep, energy |  |
	// | total_energy | etot, total, totalenergy, energy, e, etotal | etot, total, totalenergy, e, etotal |  |
	// | active_state | state, activestate, surface, istate, currentstate, active |  |  |
	// | state_energy | e_K, en_K, energy_K, v_K, es_K, estate_K |  |  |
	// | population | p_K, pop_K, population_K, rho_K |  |  |
	// | position |  |  | pos, positions, position |
	// | velocity |  |  | velo, vel, velocity, velocities |
	// | force |  |  | force, forces, frc |
	// | momentum |  |  | momenta, momentum |
	// | mass |  |  | mass, masses |
	//
	// `energy` means total_energy as a table column and potential_energy as an XYZ comment key (each the common convention of its kind of file); scan notes which it took, and a recipe's columns map says otherwise (e.g. `energy: potential_energy`).
}

// TestAmbiguous: a name that means different quantities in two kinds of
// source is reported with both meanings (issue 10: "energy" in a table
// is the total energy, energy= on an extended-XYZ comment line the
// calculator's potential energy, common practice); unambiguous names are
// not.
func TestAmbiguous(t *testing.T) {
	m := Ambiguous("Energy")
	want := []Meaning{{TableColumn, TotalEnergy}, {CommentLine, PotentialEnergy}}
	if len(m) != 2 || m[0] != want[0] || m[1] != want[1] {
		t.Errorf("Ambiguous(Energy) = %v, want %v", m, want)
	}
	for _, n := range []string{"epot", "e", "time", "E_1", "tags"} {
		if m := Ambiguous(n); m != nil {
			t.Errorf("Ambiguous(%q) = %v, want none", n, m)
		}
	}
}
