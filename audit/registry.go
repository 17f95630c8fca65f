package audit

import (
	"fmt"

	"trajvault/internal/trajfile"
)

// Scope says what a check looks at: one trajectory file, or the whole
// ensemble after every file has been audited.
type Scope int

const (
	PerFile Scope = iota
	PerEnsemble
)

// Value names a number that one check computes and a later check uses.
// A check lists the values it gives and needs; the registry keeps givers
// before needers, and the numbers travel in a typed field of derived,
// never looked up by check name.
type Value int

const (
	// FastestPeriod is the period of the fastest motion (au_time), given
	// by time-step; force-noise starts its lags after it.
	FastestPeriod Value = iota + 1
)

func (v Value) String() string {
	switch v {
	case FastestPeriod:
		return "fastest-period"
	}
	return fmt.Sprintf("Value(%d)", int(v))
}

// derived holds the values checks pass on, one typed field per Value.
type derived struct {
	fastestPeriod float64 // au_time; 0 when time-step did not measure it
}

// Spec is one registered check. The registry (Registry) drives the run of
// each file, the ensemble summary, the findings and, through a test, the
// check names and codes in schema/audit.schema.json.
type Spec struct {
	Name  string // as printed and in the JSON output
	Code  string // stable finding code
	Scope Scope
	// Quantity is the stored quantity the verdict is about.
	Quantity string
	// Doc is the formula and its source, in one paragraph; the function
	// named in it carries the full derivation.
	Doc string
	// Rule states the verdict rule with the thresholds in force.
	Rule func(s Settings) string
	// Gives and Needs list the values passed between checks.
	Gives, Needs []Value

	// file runs a per-file check: it returns the outcome and the HDF5
	// path of the quantity judged (for the finding's location).
	file func(a *auditor, d *derived) (Check, string)
	// ensemble runs a per-ensemble check.
	ensemble func(rep *Report, s Settings) Check
}

// FileUnreadable is the code of the finding for a file that could not be
// audited at all (it cannot be opened or a quantity cannot be read); the
// rest of the ensemble is audited regardless.
const FileUnreadable = "A10"

// checks is the registry, in the order the checks run and print. Codes
// are stable: a new check takes the next free code; a removed check's
// code is never reused. Check functions must not read the registry
// (the runner names their results), which keeps initialisation acyclic.
var checks = []Spec{
	{
		Name: "energy", Code: "A1", Quantity: "total_energy",
		Doc: "Conservation of E_tot = K + V(active state): largest |E(t) - E(0)|, largest step-to-step jump, least-squares drift and detrended peak-to-peak against 2<K> (velocity Verlet: (omega dt)^2/4 for harmonic motion, derived from the shadow Hamiltonian); see energyStats.",
		Rule: func(s Settings) string {
			return fmt.Sprintf("fail when the deviation exceeds %g eV or a jump %g eV; warn above %g eV or %g eV", s.EnergyFailEV, s.JumpFailEV, s.EnergyWarnEV, s.JumpWarnEV)
		},
		file: (*auditor).energy,
	},
	{
		Name: timeStepName, Code: "A3", Quantity: "force",
		Doc: "Shortest period T = 2 pi / omega of the fastest bond, omega^2 = -sum Delta a_s Delta s / sum (Delta s)^2 from frame differences of bond length s and projected relative acceleration a_s, exact for a harmonic bond and never above the fastest normal mode (derived); bonds: separation below 1.3 times the sum of covalent radii (Dalton Trans. 2008, 2832, doi:10.1039/b801115j; common practice); see TimeStepStats.",
		Rule: func(s Settings) string {
			return fmt.Sprintf("fail when dt > %g T; warn when dt > %g T and suggest %g T; unknown when frames are stored more than T/4 apart but not every step", s.StepFailFraction, s.StepWarnFraction, s.StepWarnFraction)
		},
		Gives: []Value{FastestPeriod},
		file:  (*auditor).timeStep,
	},
	{
		Name: "force-noise", Code: "A2", Quantity: "total_energy",
		Doc: "Structure function D(k) = <(E(n+k) - E(n))^2> ~ 2 sigma_w^2 + k s^2 + (k Delta r)^2 over frame pairs inside segments free of hops and energy bursts, fitted with non-negative coefficients; E is the shadow energy E + h^2/12 v.V''.v - h^2/24 F.M^-1.F of velocity Verlet when every step is stored (Hairer, Lubich, Wanner, Geometric Numerical Integration, 2006, ch. IX), else the stored energy with small-gap frames left out too; sigma_F = sqrt(s^2 / (dt Delta <sum v^2>)) for Gaussian force errors (derived); see NoiseFit.",
		Rule: func(s Settings) string {
			return fmt.Sprintf("warn when sigma_F >= %g hartree/bohr; cannot tell, with an upper bound, when the clean segments do not show a random walk rising over lags beyond the fastest period", s.NoiseWarn)
		},
		Needs: []Value{FastestPeriod},
		file:  (*auditor).noise,
	},
	{
		Name: "populations", Code: "A4", Quantity: "populations",
		Doc: "Normalisation sum_k |c_k|^2 = 1 and 0 <= |c_k|^2 <= 1 at every frame (common practice).",
		Rule: func(s Settings) string {
			return fmt.Sprintf("fail when a value leaves [0, 1] or the norm error exceeds %g; warn above %g", 100*s.NormTolerance, s.NormTolerance)
		},
		file: (*auditor).populations,
	},
	{
		Name: "hop-probability", Code: "A5", Quantity: "couplings",
		Doc: "Fewest-switches probability recomputed from amplitudes and time-derivative couplings, g_kj = max(0, -2 dt Re(c_j^* T_jk c_k) / |c_k|^2) (J. Chem. Phys. 93, 1061 (1990), doi:10.1063/1.459170).",
		Rule: func(Settings) string {
			return "warn when sum_j g_kj exceeds 1 in a step (the step is too large for the coupling)"
		},
		file: (*auditor).hopProbability,
	},
	{
		Name: "hops", Code: "A6", Quantity: "hops",
		Doc: "Energy bookkeeping per hop: an accepted hop with velocity rescaling keeps K + V, one without changes E_tot by the gap V_to - V_from; each hop's change is judged against the ordinary steps around it (never a level the hops themselves raise) and against its own gap; a frustrated hop must not be downhill (derived; J. Chem. Phys. 93, 1061 (1990), doi:10.1063/1.459170); see auditor.hops.",
		Rule: func(Settings) string {
			return fmt.Sprintf("fail when an accepted hop changes the total energy by more than %d times the largest change of the %d ordinary frames on either side and by more than %g of its own gap (a hop between stored frames: in the gap's direction and by more than %g of the smallest gap of its two states over the stored frames), or a frustrated hop was downhill; several hops between the same two frames fail together when their net change exceeds both limits, else cannot be judged, as a hop whose gap is below its tolerance", hopTolFactor, hopWindow, hopGapFraction, hopSeamFraction)
		},
		file: (*auditor).hops,
	},
	{
		Name: "momentum", Code: "A7", Quantity: "velocity",
		Doc: "Changes of E_trans = P^2/2M and E_rot = L^T I0^-1 L / 2 (inertia tensor of the first frame) against k_B T (J. Phys. Chem. Lett. 11, 1135 (2020), doi:10.1021/acs.jpclett.9b03585); see momentumTracker.",
		Rule: func(s Settings) string {
			return fmt.Sprintf("warn when either changes by more than %g k_B T at %g K", s.MomentumWarnFraction, s.Temperature)
		},
		file: (*auditor).momentum,
	},
	{
		Name: "zpe-leakage", Code: "A8", Quantity: "velocity",
		Doc: "Loss of zero-point energy: window-averaged bond kinetic energy K_ij = 1/2 mu ((v_i - v_j) . r_hat)^2 of X-H pairs against half the pair's zero-point energy and against its own start; only pairs that started at that level are judged, thermal (classical) starts never held it (J. Chem. Theory Comput. 18, 4109 (2022), doi:10.1021/acs.jctc.2c00208); see zpeTracker and auditor.zpeCheck.",
		Rule: func(s Settings) string {
			return fmt.Sprintf("warn when a pair that started at or above (1 - %g) ZPE/2 stays below it more than %g of the time; not run (does not apply) when no pair started there", s.ZPEMargin, s.ZPEWarnFraction)
		},
		file: (*auditor).zpeCheck,
	},
	{
		Name: "internal-consistency", Code: "A9", Scope: PerEnsemble, Quantity: "active_state",
		Doc: "Active-state fraction against mean |c_k|^2, frame by frame, with the binomial level 3 sqrt(P(1-P)/N) (J. Chem. Phys. 126, 134114 (2007), doi:10.1063/1.2715585; noise level derived); see Report.consistency.",
		Rule: func(s Settings) string {
			return fmt.Sprintf("fail when the gap exceeds the level at more than %g of times; warn above 0.05", s.ConsistencyFailFraction)
		},
		ensemble: (*Report).consistency,
	},
}

// timeStepName is read by the report's step plot.
const timeStepName = "time-step"

// ensemblePath is the HDF5 path the ensemble check is about.
const ensemblePath = trajfile.ActiveState

// FlaggedPrefix starts the name of each ensemble summary line, one per
// per-file check ("flagged: energy").
const FlaggedPrefix = "flagged: "

// Registry returns the registered checks in run order (a copy).
func Registry() []Spec { return append([]Spec(nil), checks...) }

// Lookup returns the registered check of that name.
func Lookup(name string) (Spec, bool) {
	for _, c := range checks {
		if c.Name == name {
			return c, true
		}
	}
	return Spec{}, false
}

// verifyRegistry reports the first inconsistency in checks: duplicate
// names or codes, a check without a runner for its scope, missing docs,
// or a needed value not given by an earlier check.
func verifyRegistry(checks []Spec) error {
	names, codes := map[string]bool{}, map[string]bool{FileUnreadable: true}
	given := map[Value]bool{}
	for _, c := range checks {
		switch {
		case c.Name == "" || names[c.Name]:
			return fmt.Errorf("audit: check name %q empty or registered twice", c.Name)
		case c.Code == "" || codes[c.Code]:
			return fmt.Errorf("audit: check %s: code %q empty or used twice", c.Name, c.Code)
		case c.Doc == "" || c.Rule == nil || c.Quantity == "":
			return fmt.Errorf("audit: check %s: needs Doc, Rule and Quantity", c.Name)
		case c.Scope == PerFile && c.file == nil, c.Scope == PerEnsemble && c.ensemble == nil:
			return fmt.Errorf("audit: check %s: no runner for its scope", c.Name)
		}
		for _, v := range c.Needs {
			if !given[v] {
				return fmt.Errorf("audit: check %s needs %s, which no earlier check gives", c.Name, v)
			}
		}
		for _, v := range c.Gives {
			given[v] = true
		}
		names[c.Name], codes[c.Code] = true, true
	}
	return nil
}

func init() {
	// A misordered registry is a programming error: fail at start-up.
	if err := verifyRegistry(checks); err != nil {
		panic(err)
	}
}
