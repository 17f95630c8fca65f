package demo

import (
	"math"
	"testing"
)

// TestRunConservesEnergy checks the model integrator against two facts of
// the method (common practice): velocity Verlet keeps the total energy
// bounded, and accepted hops keep kinetic plus potential energy (the
// rescaling solves a quadratic exactly).
func TestRunConservesEnergy(t *testing.T) {
	m := Tarnol()
	var e0, maxDev float64
	hops := 0
	m.Run(3, 2000, 5, 300, func(s *Step) {
		e := s.Kinetic + s.Energies[s.Active]
		if s.N == 0 {
			e0 = e
		}
		maxDev = math.Max(maxDev, math.Abs(e-e0))
		if s.HopTo >= 0 && !s.Frustrated {
			hops++
		}
		n := real(s.C[0])*real(s.C[0]) + imag(s.C[0])*imag(s.C[0]) + real(s.C[1])*real(s.C[1]) + imag(s.C[1])*imag(s.C[1])
		if math.Abs(n-1) > 1e-6 {
			t.Fatalf("step %d: norm %v", s.N, n)
		}
	})
	// 1e-3 Eh = 27 meV: inside the 0.1 eV criterion of practice.
	if maxDev > 1e-3 {
		t.Errorf("total energy drifts by %g Eh", maxDev)
	}
	t.Logf("max |E-E0| = %.3g Eh, accepted hops: %d", maxDev, hops)
}
