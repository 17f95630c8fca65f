package demo

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
)

// LogOptions size the invented text logs.
type LogOptions struct {
	Options
	Stride   int // write every Stride-th step
	Decimals int // decimals of positions
	// Molecules > 1 adds spectator copies of the molecule (own seeds,
	// 10 angstrom apart) to the geometry, for benchmarks of larger
	// systems; observables stay those of the first molecule.
	Molecules int
}

// WriteLogs runs one demo trajectory and writes it as the fictional
// group's in-house code would have: dir/geom.xyz (XYZ, comment line
// "step=N time=T"), dir/energies.dat (a column table with units in the
// header), dir/states.dat (per-state energies and populations) and
// dir/events.log (free text, read through a recipe).
func WriteLogs(dir string, o LogOptions) error {
	if o.Stride < 1 {
		o.Stride = 1
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	m := Tarnol()
	m.Faults = o.Faults
	toAng := mustFactor("bohr", "angstrom")
	dtAu := o.DtFs * mustFactor("fs", "au_time")
	files := map[string]*bufio.Writer{}
	var closers []*os.File
	open := func(name string) (*bufio.Writer, error) {
		f, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			return nil, err
		}
		closers = append(closers, f)
		w := bufio.NewWriterSize(f, 1<<16)
		files[name] = w
		return w, nil
	}
	geom, err := open("geom.xyz")
	if err != nil {
		return err
	}
	en, _ := open("energies.dat")
	st, _ := open("states.dat")
	ev, err := open("events.log")
	if err != nil {
		return err
	}
	fmt.Fprintf(en, "# tarnol dynamics, Tarn Valley photophysics group (invented demo data)\n")
	fmt.Fprintf(en, "# step time[fs] Ekin[hartree] Epot[hartree] Etot[hartree] state\n")
	fmt.Fprintf(st, "step,E_S1[hartree],E_S2[hartree],pop_S1,pop_S2\n")
	fmt.Fprintf(ev, "tarnol surface hopping event log (invented demo data)\n")
	syms := []string{"O", "H", "H"}
	pd := o.Decimals
	// Spectators: run first, keep their stored frames (9 floats each).
	var spect [][]float64
	for k := 1; k < o.Molecules; k++ {
		var xs []float64
		m.Run(o.Seed*1000+uint64(k), o.Steps, dtAu, o.Temp, func(s *Step) {
			if s.N%int64(o.Stride) == 0 {
				xs = append(xs, s.X...)
			}
		})
		spect = append(spect, xs)
	}
	natoms := 3 * max(o.Molecules, 1)
	frame := 0
	m.Run(o.Seed, o.Steps, dtAu, o.Temp, func(s *Step) {
		if s.HopTo >= 0 {
			kind := "accepted"
			from := s.Active
			if s.Active == s.HopTo {
				from = 1 - s.HopTo
			}
			if s.Frustrated {
				kind = "frustrated"
			}
			fmt.Fprintf(ev, "[step %7d] switch %d -> %d %s\n", s.N, from+1, s.HopTo+1, kind)
		}
		if s.N%int64(o.Stride) != 0 {
			return
		}
		t := float64(s.N) * o.DtFs
		fmt.Fprintf(geom, "%d\nstep=%d time=%.4f\n", natoms, s.N, t)
		for i := 0; i < 3; i++ {
			fmt.Fprintf(geom, "%-2s %*.*f %*.*f %*.*f\n", syms[i],
				pd+6, pd, s.X[3*i]*toAng, pd+6, pd, s.X[3*i+1]*toAng, pd+6, pd, s.X[3*i+2]*toAng)
		}
		for k, xs := range spect {
			off := 10.0 * float64(k+1)
			x := xs[9*frame : 9*frame+9]
			for i := 0; i < 3; i++ {
				fmt.Fprintf(geom, "%-2s %*.*f %*.*f %*.*f\n", syms[i],
					pd+6, pd, x[3*i]*toAng+off, pd+6, pd, x[3*i+1]*toAng, pd+6, pd, x[3*i+2]*toAng)
			}
		}
		frame++
		e := s.Energies[s.Active]
		fmt.Fprintf(en, "%8d %10.4f %16.10f %16.10f %16.10f %2d\n", s.N, t, s.Kinetic, e, s.Kinetic+e, s.Active+1)
		p0 := real(s.C[0])*real(s.C[0]) + imag(s.C[0])*imag(s.C[0])
		fmt.Fprintf(st, "%d,%.10f,%.10f,%.8f,%.8f\n", s.N, s.Energies[0], s.Energies[1], p0, 1-p0)
	})
	var ferr error
	for _, w := range files {
		if err := w.Flush(); err != nil && ferr == nil {
			ferr = err
		}
	}
	for _, f := range closers {
		if err := f.Close(); err != nil && ferr == nil {
			ferr = err
		}
	}
	return ferr
}
