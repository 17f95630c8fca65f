package trajfile

import "strings"

// The layout's paths (schema/layout.md), in one place. Everything that
// reads or writes the layout names its objects through these constants;
// no other package spells an HDF5 path.
const (
	// Root is the root group.
	Root = "/"

	H5MDGroup    = "/h5md"
	AuthorGroup  = H5MDGroup + "/author"
	CreatorGroup = H5MDGroup + "/creator"
	ModulesGroup = H5MDGroup + "/modules"
	UnitsModule  = ModulesGroup + "/units"
	OurModule    = ModulesGroup + "/" + ModuleName

	ParticlesGroup   = "/particles"
	ObservablesGroup = "/observables"
	ParametersGroup  = "/parameters"
	// ConnectivityGroup holds bonds and other index lists (H5MD 1.1).
	ConnectivityGroup = "/connectivity"
	// UnitsModuleName is the H5MD units module's group name.
	UnitsModuleName = "units"

	// Time-dependent observables (H5MD: value, step, time).
	KineticEnergy   = ObservablesGroup + "/kinetic_energy"
	PotentialEnergy = ObservablesGroup + "/potential_energy"
	TotalEnergy     = ObservablesGroup + "/total_energy"

	// The electronic-state module, version 1.1. Its time-dependent
	// elements sit directly under /observables: a common Python H5MD
	// reader (a common analysis library; see readers_test.go) reads every member of /observables as
	// an element with one value per frame and fails on a nested group.
	// The hop table (one row per attempt, not per frame) lives in the
	// module's own root group, ElectronicGroup.
	StateEnergies   = ObservablesGroup + "/state_energies"
	ActiveState     = ObservablesGroup + "/active_state"
	Populations     = ObservablesGroup + "/populations"
	Amplitudes      = ObservablesGroup + "/amplitudes"
	Couplings       = ObservablesGroup + "/couplings"
	ElectronicGroup = "/" + ModuleName
	HopsGroup       = ElectronicGroup + "/hops"
	HopStep         = HopsGroup + "/step"
	HopTime         = HopsGroup + "/time"
	HopFrom         = HopsGroup + "/from_state"
	HopTo           = HopsGroup + "/to_state"
	HopKind         = HopsGroup + "/kind"
	// LegacyElectronicGroup held every element of module version 1.0
	// (/observables/electronic/state_energies, .../hops/step, ...);
	// Legacy maps a path to it, for reading files of that version.
	LegacyElectronicGroup = ObservablesGroup + "/electronic"

	// Parameters.
	NStates  = ParametersGroup + "/n_states"
	TimeStep = ParametersGroup + "/time_step"

	// Parts of a time-dependent element (H5MD 1.1, "time-dependent data").
	Value = "/value"
	Step  = "/step"
	Time  = "/time"

	// Elements of a particle group (H5MD 1.1, "particles group").
	Position = "position"
	Velocity = "velocity"
	Force    = "force"
	Species  = "species"
	Mass     = "mass"
	Box      = "box"
	BoxEdges = "box/edges"
	ID       = "id"
	Charge   = "charge"
	Image    = "image"

	// Attributes trajvault adds to datasets.
	UnitAttr      = "unit"
	OffsetAttr    = "offset"
	FormatAttr    = "trajvault_format"
	ToleranceAttr = "trajvault_tolerance"
	// NegativeZerosAttr (int64[K] on a scale-offset value dataset) lists
	// the flat row-major indices of the values printed as negative zero
	// ("-0.000"): scale-offset decodes k/10^D + min, which loses the sign
	// of zero, and readers put it back.
	NegativeZerosAttr = "trajvault_negative_zeros"
	// ProvenanceAttr (on /parameters) holds the provenance record.
	ProvenanceAttr = "trajvault_provenance"
	// String attributes of /parameters written by convert
	// (schema/layout.md, "Precision attributes"): how the logs numbered
	// electronic states (0 or 1; stored indices are always from 0), and
	// for velocities derived from momenta (v = p/m, masses in u) the
	// momenta's unit and printed format, so that m v prints the momenta
	// again.
	StateBaseAttr      = "trajvault_state_base"
	MomentumUnitAttr   = "trajvault_momentum_unit"
	MomentumFormatAttr = "trajvault_momentum_format"

	// Attributes of H5MD 1.1 groups and datasets.
	VersionAttr        = "version"         // /h5md and every module
	NameAttr           = "name"            // author, creator
	EmailAttr          = "email"           // author
	SystemAttr         = "system"          // units module
	DimensionAttr      = "dimension"       // box
	BoundaryAttr       = "boundary"        // box
	ParticlesGroupAttr = "particles_group" // connectivity
)

// reservedNames are the names an extra per-atom element cannot take:
// the layout's own elements and H5MD's particle-group names, and the
// keys of Spec.Storage.
var reservedNames = map[string]bool{
	Position: true, Velocity: true, Force: true, Species: true, Mass: true, Box: true, ID: true, Charge: true, Image: true,
	"step": true, "time": true, "value": true, "momentum": true, "momenta": true,
	"kinetic_energy": true, "potential_energy": true, "total_energy": true,
	"state_energies": true, "active_state": true, "populations": true, "amplitudes": true, "couplings": true,
}

// ExtraNameProblem says why name cannot be an extra particle element
// (a per-atom column no quantity names, stored as /particles/all/NAME),
// or "" when it can: 1 to 64 ASCII letters, digits and underscores, not
// starting with a digit, and not a name the layout or H5MD uses.
func ExtraNameProblem(name string) string {
	if name == "" || len(name) > 64 {
		return "an element name has 1 to 64 characters"
	}
	for i, r := range name {
		if !(r == '_' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || i > 0 && r >= '0' && r <= '9') {
			return "an element name has only letters, digits and underscores, and starts with a letter or underscore"
		}
	}
	if reservedNames[strings.ToLower(name)] || strings.HasPrefix(strings.ToLower(name), "trajvault") {
		return "the layout or H5MD uses that name for another element"
	}
	return ""
}

// ParticleGroup is the path of the particle group named name.
func ParticleGroup(name string) string { return ParticlesGroup + "/" + name }

// OurGroup is the particle group trajvault writes.
var OurGroup = ParticleGroup(Group)

// Particle is the path of element el (Position, Species, ...) of the
// particle group at path group.
func Particle(group, el string) string { return group + "/" + el }

// IntegerValued reports whether an element's values are integers (stored
// as an integer type): state indices.
func IntegerValued(el string) bool { return el == ActiveState }

// ElectronicElements are the module's time-dependent elements.
var ElectronicElements = []string{StateEnergies, ActiveState, Populations, Amplitudes, Couplings}

// Legacy returns where module version 1.0 kept the module's object at
// path (an electronic element or part of the hop table), and false for
// any other path.
func Legacy(path string) (string, bool) {
	for _, e := range ElectronicElements {
		if path == e || strings.HasPrefix(path, e+"/") {
			return LegacyElectronicGroup + strings.TrimPrefix(path, ObservablesGroup), true
		}
	}
	if path == ElectronicGroup || strings.HasPrefix(path, ElectronicGroup+"/") {
		return LegacyElectronicGroup + strings.TrimPrefix(path, ElectronicGroup), true
	}
	return "", false
}
