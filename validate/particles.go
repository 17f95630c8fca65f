package validate

import (
	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
)

// template is the layout.json path of element name of any particle group
// (schema.Layout.Find matches "{group}" against any group name).
func template(name string) string { return trajfile.ParticleGroup("{group}") + "/" + name }

// particles checks one particle group: box (V11, V12), elements (V6-V10,
// V13-V15, V20, V27, V34, V35).
func (c *checker) particles(g string) {
	if c.f.Kind(g) != h5.Group {
		c.errorf("V32", g, "a particle group must be an HDF5 group")
		return
	}
	b := bindings{}
	dim, boundary := c.box(g)
	if dim > 0 {
		b["D"] = dim
	}
	// Time-independent species/mass first: they fix N.
	for _, name := range []string{trajfile.Species, trajfile.Mass, trajfile.Charge, trajfile.ID} {
		p := trajfile.Particle(g, name)
		switch {
		case c.f.Kind(p) == h5.Dataset:
			c.fixedElement(p, template(name), b)
		case c.isElement(p):
			if e := c.element(p); e != nil {
				c.typed(e, template(name), b)
				if name == trajfile.ID {
					c.uniqueIDs(e)
				}
			}
		case c.f.Kind(p) == h5.Group:
			c.errorf("V10", p, "%s is a group without step/value; a time-independent element must be a dataset", name)
		default:
			if el, ok := c.layout.Find(template(name)); ok && el.Required {
				c.errorf("V34", p, "missing; the layout requires %s (%s)", name, el.Doc)
			}
		}
	}
	var pos *tdElement
	for _, name := range []string{trajfile.Position, trajfile.Velocity, trajfile.Force, trajfile.Image} {
		p := trajfile.Particle(g, name)
		tmpl := template(name)
		switch {
		case c.isElement(p):
			e := c.element(p)
			if e == nil {
				continue
			}
			if name == trajfile.Position {
				pos = e
			}
			if name == trajfile.Image {
				c.sharedClock(pos, e)
				continue
			}
			c.typed(e, tmpl, b)
		case c.f.Kind(p) == h5.Dataset:
			if name == trajfile.Image {
				continue
			}
			// H5MD allows time-independent positions (a single structure).
			c.fixedElement(p, tmpl, b)
		case c.f.Kind(p) == h5.Group:
			c.errorf("V6", p, "group without step/value: not a valid H5MD element")
		default:
			if el, ok := c.layout.Find(tmpl); ok && el.Required {
				c.errorf("V34", p, "missing; the layout requires %s (%s)", name, el.Doc)
			}
		}
	}
	c.edges(g, dim, boundary, pos, b)
	c.extras(g, b)
}

// knownParticleNames are the members of a particle group checked above.
var knownParticleNames = map[string]bool{
	trajfile.Species: true, trajfile.Mass: true, trajfile.Charge: true, trajfile.ID: true,
	trajfile.Position: true, trajfile.Velocity: true, trajfile.Force: true, trajfile.Image: true, trajfile.Box: true,
}

// extras checks the time-dependent members of particle group g the
// layout does not name: per-atom columns convert keeps under their own
// name (schema/layout.md, "/particles/{group}/{extra}"), or another
// writer's per-particle data (H5MD 1.1.0, "particles group": a group
// may hold further elements). Each must be a valid time-dependent
// element (V6-V9) with one row per particle (V14, N as species gives it).
func (c *checker) extras(g string, b bindings) {
	names, err := c.f.Links(g)
	if err != nil {
		return // reported as V33 by the walk
	}
	for _, name := range names {
		p := trajfile.Particle(g, name)
		if knownParticleNames[name] || !c.isElement(p) {
			continue
		}
		e := c.element(p)
		if e == nil {
			continue
		}
		if n, ok := b["N"]; ok && (e.value.Shape.Rank < 2 || e.value.Shape.Dims[1] != n) {
			c.errorf("V14", e.valuePath(), "shape %s; a per-particle element has one row per particle per frame, [T][%d][...]", e.value.Shape, n)
		}
	}
}

// typed checks a time-dependent element against its layout entry.
func (c *checker) typed(e *tdElement, tmpl string, b bindings) {
	el, ok := c.layout.Find(tmpl)
	if !ok {
		return
	}
	c.shape(e.valuePath(), el, e.value, b, true)
	c.unitDim(e.valuePath(), el.Unit)
}

// fixedElement checks a time-independent dataset against its layout entry.
func (c *checker) fixedElement(p, tmpl string, b bindings) {
	el, ok := c.layout.Find(tmpl)
	if !ok {
		return
	}
	info, err := c.f.Info(p)
	if err != nil {
		c.errorf("V33", p, "cannot describe dataset (damaged file?): %v", err)
		return
	}
	if el.Kind == "time-dependent" {
		// position/velocity/force stored once, shape [N][D].
		c.shape(p, el, info, b, true)
	} else {
		c.shape(p, el, info, b, false)
	}
	c.unitDim(p, el.Unit)
}

// box checks V11 and returns the dimension and boundary.
func (c *checker) box(g string) (int, []string) {
	p := trajfile.Particle(g, trajfile.Box)
	dimAt, bndAt := attrPath(p, trajfile.DimensionAttr), attrPath(p, trajfile.BoundaryAttr)
	if c.f.Kind(p) != h5.Group {
		c.errorf("V11", p, "missing; every particle group needs a box group with dimension and boundary (use boundary none for a molecule in vacuum)")
		return 0, nil
	}
	dim := 0
	if !c.f.HasAttr(p, trajfile.DimensionAttr) {
		c.errorf("V11", dimAt, "missing; add an integer scalar attribute dimension (3)")
	} else if a, err := c.f.Attr(p, trajfile.DimensionAttr); err != nil || a.Type.Class != h5.ClassInt || len(a.Ints) != 1 || a.Ints[0] < 1 || a.Ints[0] > 3 {
		c.errorf("V11", dimAt, "must be an integer scalar in 1..3, found %s %v", a.Type, a.Ints)
	} else {
		dim = int(a.Ints[0])
		if a.Shape.Rank != 0 {
			c.errorf("V11", dimAt, "must be a scalar, found shape %s", a.Shape)
		}
	}
	var boundary []string
	if !c.f.HasAttr(p, trajfile.BoundaryAttr) {
		c.errorf("V11", bndAt, "missing; add a string[%d] attribute boundary of periodic/none", max(dim, 1))
	} else if a, err := c.f.Attr(p, trajfile.BoundaryAttr); err != nil || a.Type.Class != h5.ClassString {
		c.errorf("V11", bndAt, "must be strings, found %s", a.Type)
	} else {
		boundary = a.Strings
		c.fixedString(bndAt, a)
		if dim > 0 && len(boundary) != dim {
			c.errorf("V11", bndAt, "has %d entries for dimension %d; give one per axis", len(boundary), dim)
		}
		for _, s := range boundary {
			if s != "periodic" && s != "none" {
				c.errorf("V11", bndAt, "entry %q is neither periodic nor none", s)
			}
		}
	}
	return dim, boundary
}

// edges checks V12 (and V13 for time-dependent edges).
func (c *checker) edges(g string, dim int, boundary []string, pos *tdElement, b bindings) {
	p := trajfile.Particle(g, trajfile.BoxEdges)
	periodic := false
	for _, s := range boundary {
		periodic = periodic || s == "periodic"
	}
	switch {
	case c.f.Kind(p) == h5.Missing:
		if periodic {
			c.errorf("V12", p, "missing but the box is periodic; store the box edges (shape [D] or [D][D])")
		}
		return
	case c.isElement(p):
		e := c.element(p)
		if e == nil {
			return
		}
		c.sharedClock(pos, e)
		d := e.value.Shape.Dims[1:]
		if !(len(d) == 1 && d[0] == dim) && !(len(d) == 2 && d[0] == dim && d[1] == dim) {
			c.errorf("V12", e.valuePath(), "shape %s; time-dependent edges are [T][D] or [T][D][D] with D = %d", e.value.Shape, dim)
		}
		c.unitDim(e.valuePath(), "length")
	case c.f.Kind(p) == h5.Dataset:
		info, _ := c.f.Info(p)
		d := info.Shape.Dims
		if !(len(d) == 1 && d[0] == dim) && !(len(d) == 2 && d[0] == dim && d[1] == dim) {
			c.errorf("V12", p, "shape %s; edges are [D] or [D][D] with D = %d", info.Shape, dim)
		}
		if info.Type.Class != h5.ClassFloat {
			c.errorf("V27", p, "must be floating point, found %s", info.Type)
		}
		c.unitDim(p, "length")
	default:
		c.errorf("V12", p, "must be a dataset or a time-dependent element")
	}
}

// sharedClock checks V13: e's step (and time) are the same HDF5 objects as
// position's, compared by object identity, not by value.
func (c *checker) sharedClock(pos, e *tdElement) {
	if pos == nil {
		c.errorf("V13", e.path, "time-dependent, but the group has no time-dependent position to share step/time with")
		return
	}
	for _, d := range []string{trajfile.Step, trajfile.Time} {
		if c.f.Kind(e.path+d) == h5.Missing && c.f.Kind(pos.path+d) == h5.Missing {
			continue
		}
		a, err1 := c.f.ObjectID(e.path + d)
		b, err2 := c.f.ObjectID(pos.path + d)
		if err1 != nil || err2 != nil || a != b {
			c.errorf("V13", e.path+d, "must be the same object as %s%s (an HDF5 hard link), not a copy; relink it", pos.path, d)
		}
	}
}

// uniqueIDs checks V35 for a time-dependent id element.
func (c *checker) uniqueIDs(e *tdElement) {
	v, shape, err := c.f.ReadInt64(e.valuePath())
	if err != nil || shape.Rank != 2 {
		return
	}
	n := shape.Dims[1]
	for t := 0; t < shape.Dims[0]; t++ {
		seen := map[int64]bool{}
		for _, id := range v[t*n : (t+1)*n] {
			if id >= 0 && seen[id] { // negative ids mark absent particles
				c.errorf("V35", e.valuePath(), "id %d appears twice in frame %d; ids must be unique per frame", id, t)
				return
			}
			seen[id] = true
		}
	}
}
