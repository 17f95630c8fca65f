package validate

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"trajvault/internal/h5"
	"trajvault/internal/units"
	"trajvault/schema"
)

// Options tune a validation run.
type Options struct {
	// ToolVersion is recorded in the report.
	ToolVersion string
}

// File validates the file at path. The error is non-nil only when the file
// cannot be read at all (missing, empty, not HDF5, damaged); rule
// violations are findings in the report.
func File(path string, opt Options) (*Report, error) {
	f, err := h5.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return Opened(f, path, opt), nil
}

// Opened validates an already opened file (e.g. one read from an archive
// into memory); name is what the report calls it.
func Opened(f *h5.File, path string, opt Options) *Report {
	c := &checker{
		f:      f,
		layout: schema.Current(),
		rep: &Report{
			Tool:          Tool{Name: "trajvault", Version: opt.ToolVersion},
			File:          path,
			LayoutVersion: schema.Current().Version,
		},
		counts: map[string]int{},
	}
	c.run()
	c.rep.finish()
	return c.rep
}

// maxPerRulePath caps repeated findings of one rule on one path; the last
// one says how many more there were.
const maxPerRulePath = 1

type checker struct {
	f      *h5.File
	layout *schema.Layout
	rep    *Report
	counts map[string]int

	minor       int  // H5MD minor version
	unitAttrs   bool // some dataset has a unit attribute
	unitsModule bool
	nStates     int // from /parameters/n_states; 0 unknown
}

func (c *checker) add(code string, sev Severity, path, format string, args ...any) {
	key := code + "\x00" + path
	c.counts[key]++
	if c.counts[key] > maxPerRulePath {
		return
	}
	c.rep.Findings = append(c.rep.Findings, Finding{Code: code, Severity: sev, Path: path, Message: fmt.Sprintf(format, args...)})
}

func (c *checker) errorf(code, path, format string, args ...any) {
	c.add(code, Error, path, format, args...)
}

func (c *checker) warnf(code, path, format string, args ...any) {
	c.add(code, Warning, path, format, args...)
}

func (c *checker) run() {
	if c.f.Kind("/h5md") != h5.Group {
		c.errorf("V1", "/h5md", "no /h5md group at the root: this is not an H5MD file; write the H5MD header (version, author, creator), e.g. with trajvault convert")
		return
	}
	c.header()
	c.walk("/", map[h5.ObjectID]bool{})
	if c.unitAttrs && !c.unitsModule {
		c.warnf("V19", "/h5md/modules/units", "datasets carry unit attributes but the units module is not declared; add group /h5md/modules/units with version=(1,0) and system=\"SI\"")
	}
	c.parameters()
	if c.f.Kind("/particles") == h5.Group {
		groups, err := c.f.Links("/particles")
		if err != nil {
			c.errorf("V27", "/particles", "cannot list the particle groups: %v", err)
		}
		for _, g := range groups {
			c.particles("/particles/" + g)
		}
	} else {
		c.errorf("V27", "/particles", "no /particles group: a trajectory needs /particles/<group>/position; write positions with their species and masses")
	}
	c.observables()
	c.electronic()
	c.connectivity()
}

// ---------------------------------------------------------------- header

// stringAttr reads a scalar string attribute, reporting V3 (missing or
// not a scalar string) and V4 (variable-length).
func (c *checker) stringAttr(path, name, code string) (string, bool) {
	at := path + "@" + name
	if !c.f.HasAttr(path, name) {
		c.errorf(code, at, "missing; add a scalar fixed-length string attribute %q to %s", name, path)
		return "", false
	}
	a, err := c.f.Attr(path, name)
	if err != nil || a.Type.Class != h5.ClassString || len(a.Strings) == 0 {
		c.errorf(code, at, "must be a string, found %s; rewrite it as a scalar fixed-length string", a.Type)
		return "", false
	}
	if a.Shape.Rank != 0 {
		c.errorf(code, at, "must be a scalar string, found shape %s", a.Shape)
	}
	if a.Type.VarLen {
		c.warnf("V4", at, "variable-length string; H5MD asks for fixed-length strings (read anyway); rewrite with a fixed-length string type for strict readers")
	}
	return a.Strings[0], true
}

// version reads an integer[2] version attribute.
func (c *checker) version(path, code string) ([]int64, bool) {
	at := path + "@version"
	if !c.f.HasAttr(path, "version") {
		c.errorf(code, at, "missing; add an integer[2] attribute version, e.g. (1, 0)")
		return nil, false
	}
	a, err := c.f.Attr(path, "version")
	if err != nil || a.Type.Class != h5.ClassInt || a.Shape.Rank != 1 || len(a.Ints) != 2 {
		c.errorf(code, at, "must be integer[2], found %s %s; write it as two integers (major, minor)", a.Type, a.Shape)
		return nil, false
	}
	return a.Ints, true
}

func (c *checker) header() {
	if v, ok := c.version("/h5md", "V2"); ok {
		switch {
		case v[0] != 1:
			c.errorf("V2", "/h5md@version", "H5MD version %d.%d is unknown; this validator reads major version 1", v[0], v[1])
		case v[1] != 0 && v[1] != 1:
			c.errorf("V2", "/h5md@version", "H5MD version 1.%d is unknown; expected 1.0 or 1.1", v[1])
		default:
			c.minor = int(v[1])
		}
	} else {
		c.minor = 1
	}
	for _, g := range []string{"/h5md/author", "/h5md/creator"} {
		if c.f.Kind(g) != h5.Group {
			c.errorf("V3", g, "group missing; H5MD requires %s with a name attribute", g)
		}
	}
	if c.f.Kind("/h5md/author") == h5.Group {
		c.stringAttr("/h5md/author", "name", "V3")
		if c.f.HasAttr("/h5md/author", "email") {
			c.stringAttr("/h5md/author", "email", "V3")
		}
	}
	if c.f.Kind("/h5md/creator") == h5.Group {
		c.stringAttr("/h5md/creator", "name", "V3")
		c.stringAttr("/h5md/creator", "version", "V3")
	}
	if c.f.Kind("/h5md/modules") != h5.Group {
		return
	}
	mods, _ := c.f.Links("/h5md/modules")
	for _, m := range mods {
		p := "/h5md/modules/" + m
		if c.f.Kind(p) != h5.Group {
			c.errorf("V5", p, "a module must be a group with a version attribute")
			continue
		}
		v, ok := c.version(p, "V5")
		if m == "units" {
			c.unitsModule = true
			if c.f.HasAttr(p, "system") {
				c.stringAttr(p, "system", "V3")
			}
		}
		if m == c.layout.Module.Name && ok {
			want := c.layout.Module.Version
			if int(v[0]) != want[0] || int(v[1]) > want[1] {
				c.errorf("E1", p+"@version", "module version %d.%d is not known to this build (knows %d.%d); upgrade trajvault", v[0], v[1], want[0], want[1])
			}
		}
	}
}

// ---------------------------------------------------------------- walk

// walk visits every object once (groups are tracked by identity, so hard
// links and cycles are safe): unit strings (V18), filters (V28) and
// finite values (V26).
func (c *checker) walk(path string, seen map[h5.ObjectID]bool) {
	switch c.f.Kind(path) {
	case h5.Group:
		id, err := c.f.ObjectID(path)
		if err == nil {
			if seen[id] {
				return
			}
			seen[id] = true
		}
		c.unitAttr(path)
		links, err := c.f.Links(path)
		if err != nil {
			c.errorf("V27", path, "cannot list group members: %v", err)
			return
		}
		for _, l := range links {
			child := strings.TrimSuffix(path, "/") + "/" + l
			c.walk(child, seen)
		}
	case h5.Dataset:
		id, err := c.f.ObjectID(path)
		if err == nil {
			if seen[id] {
				return
			}
			seen[id] = true
		}
		c.unitAttr(path)
		c.dataset(path)
	case h5.DanglingSoftLink:
		c.warnf("V27", path, "soft link points nowhere; remove it or restore its target")
	case h5.ExternalLink:
		c.warnf("V27", path, "external link to another file; a deposit should be self-contained")
	}
}

func (c *checker) unitAttr(path string) {
	if !c.f.HasAttr(path, "unit") {
		return
	}
	c.unitAttrs = true
	at := path + "@unit"
	a, err := c.f.Attr(path, "unit")
	if err != nil || a.Type.Class != h5.ClassString || len(a.Strings) != 1 {
		c.errorf("V18", at, "unit must be a scalar string, found %s %s", a.Type, a.Shape)
		return
	}
	if a.Type.VarLen {
		c.warnf("V4", at, "variable-length string; the units module asks for a fixed-length ASCII string")
	}
	_, perr := units.Parse(a.Strings[0])
	switch {
	case errors.Is(perr, units.ErrSyntax):
		c.errorf("V18", at, "%v", perr)
	case errors.Is(perr, units.ErrUnknown):
		c.warnf("V18", at, "%v", perr)
	}
}

// physical reports whether a dataset holds a physical quantity (V26).
func physical(path string) bool {
	return strings.HasPrefix(path, "/particles/") || strings.HasPrefix(path, "/observables/") || strings.HasPrefix(path, "/parameters/")
}

func (c *checker) dataset(path string) {
	info, err := c.f.Info(path)
	if err != nil {
		c.errorf("V27", path, "cannot read the dataset description: %v", err)
		return
	}
	foreign := ""
	for _, fl := range info.Filters {
		if !fl.Stock() {
			foreign = fmt.Sprintf("filter %d (%s)", fl.ID, fl.Name)
			c.warnf("V28", path, "%s is not built into every HDF5 library; readers need a plugin; repack with deflate, shuffle or scale-offset", foreign)
		}
	}
	if c.f.HasAttr(path, "trajvault_tolerance") {
		if a, err := c.f.Attr(path, "trajvault_tolerance"); err == nil && len(a.Floats) == 1 {
			c.warnf("V29", path, "stored lossily: values are within +-%g (in the dataset's unit) of the source, as the writer states; export cannot give back more digits", a.Floats[0])
		} else {
			c.errorf("V29", path, "trajvault_tolerance must be one float, the absolute bound of the lossy storage")
		}
	}
	if info.Type.Class != h5.ClassFloat || !physical(path) || info.Shape.Len() == 0 {
		return
	}
	bad, first := 0, -1
	err = c.scan(path, info, func(block []float64, row0, rowLen int) {
		for i, x := range block {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				if bad == 0 {
					first = row0 + i/max(rowLen, 1)
				}
				bad++
			}
		}
	})
	if err != nil && foreign != "" {
		c.errorf("V28", path, "cannot decode the data: %s is not available to this HDF5 library; repack the dataset with stock filters", foreign)
		return
	}
	if err != nil {
		c.errorf("V26", path, "cannot read the data (damaged or truncated file?): %v", err)
		return
	}
	if bad > 0 {
		c.errorf("V26", path, "%d non-finite values (NaN or Inf), first in row %d; the run diverged or the log was cut: trim the frames or mark the trajectory as failed", bad, first)
	}
}

// scan streams a dataset in blocks of whole rows along dimension 0, so
// long runs are checked in bounded memory.
func (c *checker) scan(path string, info h5.DatasetInfo, fn func(block []float64, row0, rowLen int)) error {
	if info.Shape.Rank == 0 {
		v, _, err := c.f.ReadFloat64(path)
		if err == nil {
			fn(v, 0, 1)
		}
		return err
	}
	rows := info.Shape.Dims[0]
	rowLen := info.Shape.Len() / max(rows, 1)
	block := max(1, (1<<20)/max(rowLen, 1))
	for r := 0; r < rows; r += block {
		n := min(block, rows-r)
		v, err := c.f.ReadRows(path, info.Shape, r, n)
		if err != nil {
			return err
		}
		fn(v, r, rowLen)
	}
	return nil
}
