package demo

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
)

// LogOptions size the invented text logs.
type LogOptions struct {
	Options
	Stride   int // write every Stride-th step
	Decimals int // decimals of positions
	// RestartOverlap > 0 repeats that many stored frames of every log at
	// mid-run, as a run restarted from an earlier checkpoint writes them.
	RestartOverlap int
	// TruncateLast cuts the geometry file inside its last atom line, as
	// a job killed while writing leaves it.
	TruncateLast bool
	// Molecules > 1 adds spectator copies of the molecule (own seeds,
	// 10 angstrom apart) to the geometry, for benchmarks of larger
	// systems. The energy table is of the whole system (kinetic and
	// potential energies summed over the molecules), so that it agrees
	// with the stored velocities; states, populations and hops stay those
	// of the first molecule.
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
	toVel := mustFactor("bohr au_time-1", "angstrom fs-1")
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
	// Spectators: run first, keep their stored frames (9 floats each) and
	// their energies (kinetic, potential per stored frame, summed).
	var spect [][]float64
	var spectKin, spectPot []float64
	for k := 1; k < o.Molecules; k++ {
		var xs []float64
		n := 0
		m.Run(o.Seed*1000+uint64(k), o.Steps, dtAu, o.Temp, func(s *Step) {
			if s.N%int64(o.Stride) == 0 {
				xs = append(xs, s.X...)
				xs = append(xs, s.V...)
				xs = append(xs, s.F...)
				if n == len(spectKin) {
					spectKin, spectPot = append(spectKin, 0), append(spectPot, 0)
				}
				spectKin[n] += s.Kinetic
				spectPot[n] += s.Energies[s.Active]
				n++
			}
		})
		spect = append(spect, xs)
	}
	natoms := 3 * max(o.Molecules, 1)
	frame := 0
	// Restart: keep the text of the last RestartOverlap frames of each
	// file and write it again once, half-way through the run.
	type chunk struct{ geom, en, st string }
	var recent []chunk
	restartAt := (o.Steps / o.Stride / 2) * o.Stride
	var gbuf, ebuf, sbuf strings.Builder
	realGeom, realEn, realSt := geom, en, st
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
		if o.RestartOverlap > 0 {
			gbuf.Reset()
			ebuf.Reset()
			sbuf.Reset()
			geom, en, st = bufWriter(&gbuf), bufWriter(&ebuf), bufWriter(&sbuf)
			defer func() {
				geom.Flush()
				en.Flush()
				st.Flush()
				c := chunk{gbuf.String(), ebuf.String(), sbuf.String()}
				realGeom.WriteString(c.geom)
				realEn.WriteString(c.en)
				realSt.WriteString(c.st)
				recent = append(recent, c)
				if len(recent) > o.RestartOverlap {
					recent = recent[1:]
				}
				if int(s.N) == restartAt {
					for _, r := range recent {
						realGeom.WriteString(r.geom)
						realEn.WriteString(r.en)
						realSt.WriteString(r.st)
					}
				}
				geom, en, st = realGeom, realEn, realSt
			}()
		}
		t := float64(s.N) * o.DtFs
		// The first molecule carries velocities and forces (extended XYZ
		// columns); spectators only positions, with zeros elsewhere.
		fmt.Fprintf(geom, "%d\nProperties=species:S:1:pos:R:3:velo:R:3:forces:R:3 step=%d time=%.4f\n", natoms, s.N, t)
		for i := 0; i < 3; i++ {
			fmt.Fprintf(geom, "%-2s %*.*f %*.*f %*.*f", syms[i],
				pd+6, pd, s.X[3*i]*toAng, pd+6, pd, s.X[3*i+1]*toAng, pd+6, pd, s.X[3*i+2]*toAng)
			fmt.Fprintf(geom, " %.10f %.10f %.10f %.10f %.10f %.10f\n",
				s.V[3*i]*toVel, s.V[3*i+1]*toVel, s.V[3*i+2]*toVel, s.F[3*i], s.F[3*i+1], s.F[3*i+2])
		}
		for k, xs := range spect {
			off := 10.0 * float64(k+1)
			x := xs[27*frame : 27*frame+27]
			for i := 0; i < 3; i++ {
				fmt.Fprintf(geom, "%-2s %*.*f %*.*f %*.*f", syms[i],
					pd+6, pd, x[3*i]*toAng+off, pd+6, pd, x[3*i+1]*toAng, pd+6, pd, x[3*i+2]*toAng)
				fmt.Fprintf(geom, " %.10f %.10f %.10f %.10f %.10f %.10f\n",
					x[9+3*i]*toVel, x[9+3*i+1]*toVel, x[9+3*i+2]*toVel, x[18+3*i], x[18+3*i+1], x[18+3*i+2])
			}
		}
		kin, e := s.Kinetic, s.Energies[s.Active]
		if frame < len(spectKin) {
			kin, e = kin+spectKin[frame], e+spectPot[frame]
		}
		frame++
		fmt.Fprintf(en, "%8d %10.4f %16.10f %16.10f %16.10f %2d\n", s.N, t, kin, e, kin+e, s.Active+1)
		p0 := real(s.C[0])*real(s.C[0]) + imag(s.C[0])*imag(s.C[0])
		fmt.Fprintf(st, "%d,%.10f,%.10f,%.8f,%.8f\n", s.N, s.Energies[0], s.Energies[1], p0, 1-p0)
	})
	var ferr error
	if o.TruncateLast {
		// Drop the tail of the last atom line.
		realGeom.Flush()
		f := closers[0]
		if st, err := f.Stat(); err == nil && st.Size() > 20 {
			ferr = f.Truncate(st.Size() - 20)
			f.Seek(0, 2)
		}
	}
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

func bufWriter(w io.Writer) *bufio.Writer { return bufio.NewWriter(w) }
