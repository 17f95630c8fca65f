package demo

import (
	"fmt"

	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// Options size a demo trajectory.
type Options struct {
	Faults Faults
	Seed   uint64
	Steps  int     // integration steps
	DtFs   float64 // time step in fs
	Temp   float64 // initial temperature, K
	Author string
	Tool   string // creator version
	// Stride > 1 stores every Stride-th step in WriteH5 (the hop log
	// keeps every hop), as long runs are often kept.
	Stride int
	// ForcesAsUsed stores the forces the integrator used (with
	// Faults.ForceNoise) instead of the exact forces of the surface, as
	// a code that writes its noisy gradients does; velocities are always
	// those of the run.
	ForcesAsUsed bool
}

// DefaultOptions give a 100 fs run at 0.05 fs steps: short enough a step
// that the energy stays clean through the avoided crossings (at 0.125 fs
// the audit measures a random walk from them).
var DefaultOptions = Options{Seed: 1, Steps: 2000, DtFs: 0.05, Temp: 300, Author: "Tarn Valley photophysics group (fictional)"}

func mustFactor(from, to string) float64 {
	f, err := units.Factor(from, to)
	if err != nil {
		panic(err)
	}
	return f
}

// WriteH5 runs one demo trajectory and writes it with the trajectory
// writer: the numbers are given in the units a typical log would use and
// stored in trajfile.ReaderUnits, so that common readers open the file.
func WriteH5(path string, o Options) error {
	m := Tarnol()
	m.Faults = o.Faults
	var (
		toAng  = mustFactor("bohr", "angstrom")
		toVel  = mustFactor("bohr au_time-1", "angstrom fs-1")
		toU    = mustFactor("me", "u")
		toInvF = mustFactor("au_time-1", "fs-1")
		dtAu   = o.DtFs * mustFactor("fs", "au_time")
	)
	masses := make([]float64, 3)
	for i := range masses {
		masses[i] = m.Mass[i] * toU
	}
	w, err := trajfile.Create(path, trajfile.Spec{
		Author: o.Author, Creator: "trajvault demo", CreatorVersion: o.Tool,
		Species: []int{8, 1, 1}, Masses: masses, ForReaders: true,
		Velocity: true, Force: true, Kinetic: true, Potential: true, Total: true,
		NStates: 2, StateEnergies: true, ActiveState: true, Populations: true, Amplitudes: true,
		Couplings: true, Hops: true,
		Integrator: "velocity Verlet", Method: "fewest-switches surface hopping on a two-state model (demo)",
		TimeStep: o.DtFs,
		Attrs:    map[string]string{"scenario": "invented demo data set: model triatomic 'tarnol'"},
	})
	if err != nil {
		return err
	}
	var ferr error
	m.Run(o.Seed, o.Steps, dtAu, o.Temp, func(s *Step) {
		if ferr != nil {
			return
		}
		force := s.F
		if o.ForcesAsUsed {
			force = s.FUsed
		}
		fr := trajfile.Frame{
			Step: s.N, Time: float64(s.N) * o.DtFs, // as a log prints it: step times dt
			Position: scale(s.X, toAng), Velocity: scale(s.V, toVel), Force: append([]float64(nil), force...),
			Kinetic: s.Kinetic, Potential: s.Energies[s.Active], Total: s.Kinetic + s.Energies[s.Active],
			StateEnergies: s.Energies[:], ActiveState: s.Active,
			Populations: []float64{real(s.C[0])*real(s.C[0]) + imag(s.C[0])*imag(s.C[0]), real(s.C[1])*real(s.C[1]) + imag(s.C[1])*imag(s.C[1])},
			Amplitudes:  []float64{real(s.C[0]), imag(s.C[0]), real(s.C[1]), imag(s.C[1])},
			Couplings:   []float64{0, s.Coupling * toInvF, -s.Coupling * toInvF, 0},
		}
		if s.HopTo >= 0 {
			from := s.Active
			if s.Active == s.HopTo { // executed: it came from the other state
				from = 1 - s.HopTo
			}
			ferr = w.WriteHop(trajfile.Hop{Step: s.N, Time: fr.Time, From: from, To: s.HopTo, Frustrated: s.Frustrated})
		}
		if ferr == nil && (o.Stride <= 1 || s.N%int64(o.Stride) == 0) {
			ferr = w.WriteFrame(&fr)
		}
	})
	if ferr != nil {
		w.Abort()
		return fmt.Errorf("demo: %w", ferr)
	}
	return w.Close()
}

func scale(v []float64, f float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = x * f
	}
	return out
}
