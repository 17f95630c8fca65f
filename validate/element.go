package validate

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
	"trajvault/schema"
)

// tdElement is a time-dependent element as found in the file.
type tdElement struct {
	path  string
	fixed bool      // fixed mode: scalar step/time
	steps []int64   // explicit mode
	times []float64 // explicit mode, nil if absent
	value h5.DatasetInfo
	T     int // frames: value.shape[0]
}

func (e *tdElement) valuePath() string { return e.path + trajfile.Value }

// isElement reports whether path is a group that looks like a
// time-dependent element (has step or value).
func (c *checker) isElement(path string) bool {
	return c.f.Kind(path) == h5.Group && (c.f.Kind(path+trajfile.Value) != h5.Missing || c.f.Kind(path+trajfile.Step) != h5.Missing)
}

// element checks V6-V9, V22, V25 and V36 for the time-dependent element at
// path and returns it, or nil when it is too broken to use.
func (c *checker) element(path string) *tdElement {
	e := &tdElement{path: path}
	stepP, timeP, valueP := path+trajfile.Step, path+trajfile.Time, path+trajfile.Value
	hasStep := c.f.Kind(stepP) == h5.Dataset
	hasValue := c.f.Kind(valueP) == h5.Dataset
	hasTime := c.f.Kind(timeP) == h5.Dataset
	if !hasValue {
		c.errorf("V6", path, "time-dependent element without a value dataset; store the data as %s", valueP)
		return nil
	}
	if !hasStep {
		c.errorf("V6", path, "time-dependent element without a step dataset; add %s (integer step of each frame)", stepP)
		return nil
	}
	if !hasTime && c.minor == 0 {
		c.errorf("V6", path, "H5MD 1.0 requires a time dataset; add %s with a unit", timeP)
	}
	var err error
	if e.value, err = c.f.Info(valueP); err != nil {
		c.errorf("V33", valueP, "cannot describe dataset (damaged file?): %v", err)
		return nil
	}
	if e.value.Shape.Rank < 1 {
		c.errorf("V6", valueP, "value of a time-dependent element must have a frame dimension, found %s", e.value.Shape)
		return nil
	}
	e.T = e.value.Shape.Dims[0]
	si, _ := c.f.Info(stepP)
	if si.Type.Class != h5.ClassInt {
		c.errorf("V7", stepP, "step must be an integer dataset, found %s; store integration step numbers as integers", si.Type)
		return nil
	}
	var ti h5.DatasetInfo
	if hasTime {
		ti, _ = c.f.Info(timeP)
		if ti.Type.Class != h5.ClassFloat && ti.Type.Class != h5.ClassInt {
			c.errorf("V7", timeP, "time must be numeric, found %s", ti.Type)
			hasTime = false
		} else if ti.Shape.Rank != si.Shape.Rank {
			c.errorf("V7", timeP, "time has rank %d but step has rank %d; both scalar (fixed mode) or both 1-D (explicit mode)", ti.Shape.Rank, si.Shape.Rank)
			hasTime = false
		}
		if c.f.HasAttr(timeP, trajfile.UnitAttr) {
			c.unitDim(timeP, "time")
		} else {
			c.errorf("V20", timeP, "time has no unit attribute; add unit=\"fs\" (or the unit the times are in)")
		}
	}
	if c.f.HasAttr(stepP, trajfile.UnitAttr) {
		c.warnf("V36", stepP, "step is a count and takes no unit attribute; remove it")
	}
	switch si.Shape.Rank {
	case 0:
		e.fixed = true
		st, _, err := c.f.ReadInt64(stepP)
		if err == nil && len(st) == 1 && st[0] <= 0 {
			c.errorf("V9", stepP, "fixed-mode step increment is %d; it must be positive", st[0])
			return e
		}
		// Expand the fixed clock so the checks below (hops within the
		// run, state changes matched by hops) work in both modes.
		if err == nil && len(st) == 1 {
			off := int64(0)
			if a, err := c.f.Attr(stepP, trajfile.OffsetAttr); err == nil && len(a.Ints) == 1 {
				off = a.Ints[0]
			}
			e.steps = make([]int64, e.T)
			for i := range e.steps {
				e.steps[i] = off + int64(i)*st[0]
			}
		}
		return e
	case 1:
	default:
		c.errorf("V7", stepP, "step must be scalar (fixed mode) or 1-D (explicit mode), found rank %d", si.Shape.Rank)
		return nil
	}
	e.steps, _, err = c.f.ReadInt64(stepP)
	if err != nil {
		c.errorf("V33", stepP, "cannot read (damaged file?): %v", err)
		return nil
	}
	if hasTime {
		e.times, _, err = c.f.ReadFloat64(timeP)
		if err != nil {
			c.errorf("V33", timeP, "cannot read (damaged file?): %v", err)
			e.times = nil
		}
	}
	if len(e.steps) != e.T {
		c.errorf("V8", stepP, "%d steps for %d frames of value; step, time and value must have one entry per frame", len(e.steps), e.T)
	}
	if e.times != nil && len(e.times) != len(e.steps) {
		c.errorf("V8", timeP, "%d times for %d steps; write one time per step", len(e.times), len(e.steps))
		e.times = nil
	}
	// V22: frames past the last written one read as the fill value 0.
	trail := 0
	for i := len(e.steps) - 1; i > 0 && e.steps[i] == 0; i-- {
		trail++
	}
	if trail > 0 && e.steps[len(e.steps)-1-trail] > 0 {
		c.errorf("V22", stepP, "the last %d frames have step 0 after step %d: unwritten fill frames left by an interrupted writer; cut the datasets to %d frames", trail, e.steps[len(e.steps)-1-trail], len(e.steps)-trail)
		e.steps = e.steps[:len(e.steps)-trail]
		if e.times != nil {
			e.times = e.times[:len(e.steps)]
		}
	}
	c.monotone(stepP, len(e.steps), func(i int) float64 { return float64(e.steps[i]) })
	if e.times != nil {
		c.monotone(timeP, len(e.times), func(i int) float64 { return e.times[i] })
		c.clock(e)
	}
	return e
}

// monotone checks V9: never decreasing (error), strictly increasing
// (repeats are warnings).
func (c *checker) monotone(path string, n int, at func(int) float64) {
	dec, rep, firstDec, firstRep := 0, 0, -1, -1
	for i := 1; i < n; i++ {
		switch d := at(i) - at(i-1); {
		case d < 0 || math.IsNaN(d):
			if dec == 0 {
				firstDec = i
			}
			dec++
		case d == 0:
			if rep == 0 {
				firstRep = i
			}
			rep++
		}
	}
	if dec > 0 {
		c.errorf("V9", path, "decreases %d times, first at frame %d (%g after %g): restarted or concatenated logs; remove the overlapping frames", dec, firstDec, at(firstDec), at(firstDec-1))
	}
	if rep > 0 {
		c.warnf("V9", path, "repeats %d times, first at frame %d (%g): duplicated frames, often from a restart; keep one of each", rep, firstRep, at(firstRep))
	}
}

// clock checks V25: time = time[0] + (step - step[0]) dt with one dt.
// dt is the median over frame intervals; an interval whose own dt differs
// from it by more than 1 % (times printed with few digits pass, a reset or
// changed clock does not) is reported, with where it happens.
func (c *checker) clock(e *tdElement) {
	n := len(e.steps)
	if n < 3 {
		return
	}
	var rates []float64
	for i := 1; i < n; i++ {
		if ds := e.steps[i] - e.steps[i-1]; ds > 0 {
			rates = append(rates, (e.times[i]-e.times[i-1])/float64(ds))
		}
	}
	if len(rates) == 0 {
		return
	}
	sorted := append([]float64(nil), rates...)
	sort.Float64s(sorted)
	dt := sorted[len(sorted)/2]
	for i := 1; i < n; i++ {
		ds := e.steps[i] - e.steps[i-1]
		if ds <= 0 {
			continue
		}
		got := e.times[i] - e.times[i-1]
		want := float64(ds) * dt
		if math.Abs(got-want) > 0.01*math.Abs(want)+1e-12*math.Abs(e.times[i]) {
			c.warnf("V25", e.path+trajfile.Time, "between steps %d and %d time advances by %g, but the run's time step (%g per step) gives %g: the time step changed or the clock was reset; check the log", e.steps[i-1], e.steps[i], got, dt, want)
			return
		}
	}
}

// unitDim checks V20 (trajvault profile: a dimensional dataset carries a
// unit) and V40 (any profile: a unit it carries has the named
// dimension); an unparsable unit was already reported by V18.
func (c *checker) unitDim(path, dimName string) {
	if dimName == "" {
		return
	}
	want, ok := units.DimByName(dimName)
	if !ok {
		panic("validate: unknown dimension " + dimName)
	}
	if !c.f.HasAttr(path, trajfile.UnitAttr) {
		if want == units.Dimensionless {
			return
		}
		c.errorf("V20", path, "no unit attribute (expected a unit of %s); add one, e.g. unit=%q", dimName, example[dimName])
		return
	}
	a, err := c.f.Attr(path, trajfile.UnitAttr)
	if err != nil || len(a.Strings) != 1 {
		return
	}
	u, err := units.Parse(a.Strings[0])
	if err != nil {
		if errors.Is(err, units.ErrUnknown) {
			return // V18 warned; dimension unknown
		}
		return
	}
	if !u.Is(want) {
		c.errorf("V40", path, "unit %q is a %v but this dataset holds a %s; use a %s unit such as %q", a.Strings[0], u.Dim, dimName, dimName, example[dimName])
	}
}

var example = map[string]string{
	"length": "angstrom", "velocity": "angstrom fs-1", "force": "hartree bohr-1", "mass": "u",
	"energy": "hartree", "time": "fs", "inverse time": "fs-1", "dimensionless": "",
}

// bindings hold the values of shape symbols (N, D, S, H) found so far.
type bindings map[string]int

// shape checks a dataset's type and shape against its layout element (V27
// and, for symbol mismatches, the rule owning the symbol). T is the
// element's frame count, or -1 for time-independent elements.
func (c *checker) shape(path string, el schema.Element, info h5.DatasetInfo, b bindings, timeDep bool) {
	dtypeCode := "V27"
	if el.Path == template(trajfile.Species) || el.Path == template(trajfile.Mass) {
		dtypeCode = "V15"
	}
	switch el.DType {
	case "float":
		if info.Type.Class != h5.ClassFloat {
			c.errorf(dtypeCode, path, "must be floating point, found %s; store %s as float64", info.Type, el.Doc)
		}
	case "int":
		if info.Type.Class != h5.ClassInt && info.Type.Class != h5.ClassEnum {
			c.errorf(dtypeCode, path, "must be integer, found %s; store %s as integers", info.Type, el.Doc)
		}
	case "string":
		if info.Type.Class != h5.ClassString {
			c.errorf(dtypeCode, path, "must be a string, found %s", info.Type)
		}
	}
	dims := el.Dims()
	got := info.Shape.Dims
	if timeDep {
		if len(dims) > 0 && dims[0] == "T" {
			dims = dims[1:]
		}
		if len(got) > 0 {
			got = got[1:]
		}
	}
	if len(got) != len(dims) {
		c.errorf("V27", path, "has shape %s; the layout expects %s", info.Shape, el.Shape)
		return
	}
	for i, sym := range dims {
		var want int
		if n, err := fmt.Sscan(sym, &want); n == 1 && err == nil {
			if got[i] != want {
				c.errorf("V27", path, "dimension %d is %d; the layout expects %s", i, got[i], el.Shape)
			}
			continue
		}
		if v, ok := b[sym]; ok {
			if got[i] != v {
				code := map[string]string{"N": "V14", "D": "V14", "S": "E3", "H": "E7"}[sym]
				if code == "" {
					code = "V27"
				}
				c.errorf(code, path, "%s = %d here but %d elsewhere in the file (%s); every %s-sized dimension must agree", sym, got[i], v, c.layout.Symbols[sym], sym)
			}
			continue
		}
		b[sym] = got[i]
	}
}
