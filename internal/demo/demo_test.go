package demo

import (
	"math"
	"os"
	"path/filepath"
	"strings"
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

// TestLogFaults: the restart and truncation knobs write what scan must
// find: repeated steps and a cut last frame.
func TestLogFaults(t *testing.T) {
	dir := t.TempDir()
	o := LogOptions{Options: DefaultOptions, Decimals: 6, RestartOverlap: 5, TruncateLast: true}
	o.Steps = 100
	if err := WriteLogs(dir, o); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(filepath.Join(dir, "geom.xyz"))
	text := string(b)
	if n := strings.Count(text, "step=50 "); n != 2 {
		t.Errorf("step 50 written %d times, want 2 (restart overlap)", n)
	}
	if strings.HasSuffix(text, "\n") {
		t.Error("last frame not cut")
	}
	e, _ := os.ReadFile(filepath.Join(dir, "energies.dat"))
	if n := strings.Count(string(e), "\n      50 "); n != 2 {
		t.Errorf("energies: step 50 written %d times", n)
	}
}

// TestForcesAsUsed: with ForcesAsUsed the stored forces are those the
// integrator used, which differ from the exact forces of the surface by
// the injected Gaussian noise: their standard deviation is the injected
// sigma within 5 % over 9 x 2001 components (sampling error about 0.5 %,
// common practice for the spread of a sample standard deviation,
// 1/sqrt(2n)); without noise they are the exact forces.
func TestForcesAsUsed(t *testing.T) {
	for _, sigma := range []float64{0, 1e-4} {
		m := Tarnol()
		m.Faults.ForceNoise = sigma
		sum, n := 0.0, 0
		m.Run(5, 2000, 2, 300, func(s *Step) {
			for k := range s.F {
				d := s.FUsed[k] - s.F[k]
				sum += d * d
				n++
			}
		})
		got := math.Sqrt(sum / float64(n))
		if sigma == 0 && got != 0 || sigma > 0 && math.Abs(got/sigma-1) > 0.05 {
			t.Errorf("injected %g: stored forces differ from the exact ones by %g", sigma, got)
		}
	}
}
