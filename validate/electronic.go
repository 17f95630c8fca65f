package validate

import (
	"math"

	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
)

// at is where the file keeps the module's object at path: path itself,
// or in files of module version 1.0 the nested path (trajfile.Legacy).
func (c *checker) at(path string) string {
	if c.f.Kind(path) != h5.Missing {
		return path
	}
	if old, ok := trajfile.Legacy(path); ok && c.f.Kind(old) != h5.Missing {
		return old
	}
	return path
}

// electronic checks the trajvault_electronic module (E1-E10).
func (c *checker) electronic() {
	var found string
	for _, p := range append(append([]string(nil), trajfile.ElectronicElements...), trajfile.HopsGroup) {
		if q := c.at(p); c.f.Kind(q) != h5.Missing && found == "" {
			found = q
		}
	}
	if found == "" {
		return
	}
	mod := trajfile.OurModule
	if c.f.Kind(mod) != h5.Group {
		c.errorf("E1", mod, "electronic-state data (%s) but the module is not declared; add group %s with version=(%d, %d)", found, mod, c.layout.Module.Version[0], c.layout.Module.Version[1])
	}
	if c.nStates == 0 && c.f.Kind(trajfile.NStates) == h5.Missing {
		c.errorf("E2", trajfile.NStates, "missing; with electronic data, store the number of states as an integer scalar dataset")
	}
	b := bindings{}
	if c.nStates > 0 {
		b["S"] = c.nStates
	}
	elems := map[string]*tdElement{}
	for _, p := range trajfile.ElectronicElements {
		q := c.at(p)
		if !c.isElement(q) {
			if c.f.Kind(q) != h5.Missing {
				c.errorf("V6", q, "must be a time-dependent element (group with step, time, value)")
			}
			continue
		}
		e := c.element(q)
		if e == nil {
			continue
		}
		c.typed(e, p, b)
		elems[p] = e
	}
	S := b["S"]
	if e := elems[trajfile.ActiveState]; e != nil && S > 0 {
		c.activeRange(e, S)
	}
	if e := elems[trajfile.Populations]; e != nil {
		c.populations(e, e.valuePath(), false)
	}
	if e := elems[trajfile.Amplitudes]; e != nil {
		c.populations(e, e.valuePath(), true)
	}
	if e := elems[trajfile.Couplings]; e != nil {
		c.antisymmetric(e)
	}
	if c.f.Kind(c.at(trajfile.HopsGroup)) == h5.Group {
		c.hops(S, elems[trajfile.ActiveState], b)
	}
}

func (c *checker) activeRange(e *tdElement, S int) {
	v, _, err := c.f.ReadInt64(e.valuePath())
	if err != nil {
		return
	}
	for i, s := range v {
		if s < 0 || s >= int64(S) {
			c.errorf("E4", e.valuePath(), "frame %d: active state %d is outside 0..%d", i, s, S-1)
			return
		}
	}
}

// populations checks E5 (each in [0,1]) and E6 (rows sum to 1) for
// populations, or for |c_k|^2 when amp is true.
func (c *checker) populations(e *tdElement, path string, amp bool) {
	const tol, sumTol = 1e-9, 1e-4
	outFrame, sumFrame := -1, -1
	var outVal, sumVal float64
	err := c.scan(path, e.value, func(block []float64, row0, rowLen int) {
		for r := 0; r*rowLen < len(block); r++ {
			row := block[r*rowLen : (r+1)*rowLen]
			sum := 0.0
			for k := 0; k < len(row); k++ {
				p := row[k]
				if amp {
					if k%2 == 1 {
						continue
					}
					p = row[k]*row[k] + row[k+1]*row[k+1]
				}
				sum += p
				if (p < -tol || p > 1+tol) && outFrame < 0 {
					outFrame, outVal = row0+r, p
				}
			}
			if math.Abs(sum-1) > sumTol && sumFrame < 0 {
				sumFrame, sumVal = row0+r, sum
			}
		}
	})
	if err != nil {
		return
	}
	what := "population"
	if amp {
		what = "|c_k|^2"
	}
	if outFrame >= 0 {
		c.errorf("E5", path, "frame %d: %s %g outside [0, 1]; the electronic propagation failed or the column is not a population", outFrame, what, outVal)
	}
	if sumFrame >= 0 {
		c.warnf("E6", path, "frame %d: %ss sum to %.8g, not 1 (tolerance 1e-4): the propagator lost norm; check the electronic time step", sumFrame, what, sumVal)
	}
}

// antisymmetric checks E9 on couplings[t][j][k].
func (c *checker) antisymmetric(e *tdElement) {
	if e.value.Shape.Rank != 3 || e.value.Shape.Dims[1] != e.value.Shape.Dims[2] {
		return
	}
	S := e.value.Shape.Dims[1]
	bad := -1
	c.scan(e.valuePath(), e.value, func(block []float64, row0, rowLen int) {
		for r := 0; r*rowLen < len(block) && bad < 0; r++ {
			m := block[r*rowLen : (r+1)*rowLen]
			scale := absMax(m)
			for j := 0; j < S; j++ {
				for k := j; k < S; k++ {
					if math.Abs(m[j*S+k]+m[k*S+j]) > 1e-6*scale {
						bad = row0 + r
					}
				}
			}
		}
	})
	if bad >= 0 {
		c.warnf("E9", e.valuePath(), "frame %d: couplings are not antisymmetric (d_jk != -d_kj); store <j|d/dt k> for every pair, or check the phase tracking of the wavefunctions", bad)
	}
}

// hops checks the hop table (E7, E8, E10).
func (c *checker) hops(S int, active *tdElement, b bindings) {
	g := c.at(trajfile.HopsGroup)
	cols := map[string][]int64{}
	for _, p := range []string{trajfile.HopStep, trajfile.HopFrom, trajfile.HopTo, trajfile.HopKind} {
		q := c.at(p)
		if c.f.Kind(q) != h5.Dataset {
			c.errorf("E7", q, "missing; the hops table needs step, time, from_state, to_state and kind")
			return
		}
		info, _ := c.f.Info(q)
		if el, ok := c.layout.Find(p); ok {
			c.shape(q, el, info, b, false)
		}
		v, _, err := c.f.ReadInt64(q)
		if err != nil {
			return
		}
		cols[p] = v
	}
	if ht := c.at(trajfile.HopTime); c.f.Kind(ht) == h5.Dataset {
		info, _ := c.f.Info(ht)
		if el, ok := c.layout.Find(trajfile.HopTime); ok {
			c.shape(ht, el, info, b, false)
		}
		c.unitDim(ht, "time")
	}
	steps := cols[trajfile.HopStep]
	n := len(steps)
	for _, p := range []string{trajfile.HopFrom, trajfile.HopTo, trajfile.HopKind} {
		if len(cols[p]) != n {
			c.errorf("E7", c.at(p), "%d rows but step has %d; every hop column needs one row per attempt", len(cols[p]), n)
			return
		}
	}
	for i := 0; i < n; i++ {
		from, to, kind := cols[trajfile.HopFrom][i], cols[trajfile.HopTo][i], cols[trajfile.HopKind][i]
		switch {
		case kind != 0 && kind != 1:
			c.errorf("E7", c.at(trajfile.HopKind), "row %d: kind %d; use 0 (accepted) or 1 (frustrated)", i, kind)
		case S > 0 && (from < 0 || from >= int64(S) || to < 0 || to >= int64(S)):
			c.errorf("E7", g, "row %d: hop %d -> %d outside states 0..%d", i, from, to, S-1)
		case from == to:
			c.errorf("E7", g, "row %d: hop from state %d to itself", i, from)
		}
		if i > 0 && steps[i] < steps[i-1] {
			c.errorf("E8", c.at(trajfile.HopStep), "row %d: step %d before step %d; hops must be in time order", i, steps[i], steps[i-1])
		}
	}
	if active == nil || len(active.steps) == 0 {
		return
	}
	run := active.steps
	for i, s := range steps {
		if s < run[0] || s > run[len(run)-1] {
			c.errorf("E8", c.at(trajfile.HopStep), "row %d: hop at step %d outside the run (steps %d..%d)", i, s, run[0], run[len(run)-1])
			break
		}
	}
	c.hopsMatchActive(cols, active)
}

// hopsMatchActive checks E10: each change of the active state between two
// stored frames is explained by an accepted hop in that step interval that
// ends in the new state.
func (c *checker) hopsMatchActive(cols map[string][]int64, active *tdElement) {
	st, _, err := c.f.ReadInt64(active.valuePath())
	if err != nil || len(st) != len(active.steps) {
		return
	}
	j := 0
	for i := 1; i < len(st); i++ {
		if st[i] == st[i-1] {
			continue
		}
		lo, hi := active.steps[i-1], active.steps[i]
		found := false
		steps, kinds, to := cols[trajfile.HopStep], cols[trajfile.HopKind], cols[trajfile.HopTo]
		for ; j < len(steps) && steps[j] <= hi; j++ {
			if steps[j] > lo && kinds[j] == 0 && to[j] == st[i] {
				found = true
			}
		}
		if !found {
			c.warnf("E10", active.valuePath(), "active state changes %d -> %d between steps %d and %d with no accepted hop logged there; the hops table is incomplete", st[i-1], st[i], lo, hi)
			return
		}
	}
}
