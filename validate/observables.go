package validate

import (
	"math"
	"slices"
	"strings"

	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
)

// observables checks the time-dependent elements under /observables that
// the layout documents (energies), plus the H5MD element rules for any
// other element there.
func (c *checker) observables() {
	if c.f.Kind(trajfile.ObservablesGroup) != h5.Group {
		return
	}
	seen := map[h5.ObjectID]bool{}
	var visit func(string)
	visit = func(p string) {
		if p == trajfile.LegacyElectronicGroup || strings.HasPrefix(p, trajfile.LegacyElectronicGroup+"/") || slices.Contains(trajfile.ElectronicElements, p) {
			return // module elements: electronic()
		}
		if c.isElement(p) {
			e := c.element(p)
			if e == nil {
				return
			}
			if el, ok := c.layout.Find(p); ok {
				c.shape(e.valuePath(), el, e.value, bindings{}, true)
				c.unitDim(e.valuePath(), el.Unit)
			}
			return
		}
		if c.f.Kind(p) != h5.Group {
			return
		}
		// A group linked from inside itself is a cycle: visit it once.
		if id, err := c.f.ObjectID(p); err != nil || seen[id] {
			return
		} else {
			seen[id] = true
		}
		links, _ := c.f.Links(p)
		for _, l := range links {
			visit(p + "/" + l)
		}
	}
	visit(trajfile.ObservablesGroup)
}

// parameters checks /parameters/time_step and /parameters/n_states.
func (c *checker) parameters() {
	if el, ok := c.layout.Find(trajfile.TimeStep); ok && c.f.Kind(trajfile.TimeStep) == h5.Dataset {
		info, _ := c.f.Info(trajfile.TimeStep)
		c.shape(trajfile.TimeStep, el, info, bindings{}, false)
		c.unitDim(trajfile.TimeStep, "time")
	}
	p := trajfile.NStates
	if c.f.Kind(p) != h5.Dataset {
		return
	}
	info, _ := c.f.Info(p)
	v, _, err := c.f.ReadInt64(p)
	if info.Type.Class != h5.ClassInt || info.Shape.Rank != 0 || err != nil || len(v) != 1 || v[0] < 1 {
		c.errorf("E2", p, "must be a positive integer scalar (the number of electronic states), found %s %s %v", info.Type, info.Shape, v)
		return
	}
	c.nStates = int(v[0])
}

// connectivity checks V17 (integer indices within the particle groups)
// and V37 (the group they refer to is named).
func (c *checker) connectivity() {
	if c.f.Kind(trajfile.ConnectivityGroup) != h5.Group {
		return
	}
	maxN := 0
	if groups, err := c.f.Links(trajfile.ParticlesGroup); err == nil {
		for _, g := range groups {
			if info, err := c.f.Info(trajfile.Particle(trajfile.ParticleGroup(g), trajfile.Species)); err == nil && info.Shape.Rank >= 1 {
				maxN = max(maxN, info.Shape.Dims[info.Shape.Rank-1])
			}
		}
	}
	links, _ := c.f.Links(trajfile.ConnectivityGroup)
	for _, l := range links {
		p := trajfile.ConnectivityGroup + "/" + l
		path := p
		if c.isElement(p) {
			path = p + trajfile.Value
		}
		if c.f.Kind(path) != h5.Dataset {
			continue
		}
		info, _ := c.f.Info(path)
		if info.Type.Class != h5.ClassInt {
			c.errorf("V17", path, "connectivity must hold integer particle indices, found %s", info.Type)
			continue
		}
		if !c.f.HasAttr(p, trajfile.ParticlesGroupAttr) && !c.f.HasAttr(path, trajfile.ParticlesGroupAttr) {
			c.errorf("V37", p, "no particles_group attribute; add an object reference to the particle group the indices refer to")
		}
		v, _, err := c.f.ReadInt64(path)
		if err != nil {
			continue
		}
		for _, x := range v {
			if x < -1 || (maxN > 0 && x >= int64(maxN)) {
				c.errorf("V17", path, "index %d is outside 0..%d (N = %d particles)", x, maxN-1, maxN)
				break
			}
		}
	}
}

func absMax(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = math.Max(m, math.Abs(x))
	}
	return m
}
