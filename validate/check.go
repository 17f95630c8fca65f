package validate

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
	"trajvault/schema"
)

// Options tune a validation run.
type Options struct {
	// ToolVersion is recorded in the report.
	ToolVersion string
	// Profile chooses the rules: ProfileH5MD, ProfileTrajvault, or ""
	// (ProfileAuto) to let the file say (see Select).
	Profile Profile
	// MaxReadBytes and AllowExternalDir go to h5.OpenOptions (open.go).
	MaxReadBytes     int64
	AllowExternalDir string
}

// Profile is a set of rules a file is checked against.
type Profile string

// The profiles. Every rule belongs to one (RuleProfiles): the h5md
// profile holds what the H5MD 1.0/1.1 specification requires of every
// file, plus warnings about things that stop readers (unknown or
// non-canonical unit spellings, plugin filters, links out of the file);
// the trajvault profile adds trajvault's stricter policy, its module's
// rules and the provenance rules.
const (
	ProfileAuto      Profile = ""
	ProfileH5MD      Profile = "h5md"
	ProfileTrajvault Profile = "trajvault"
)

// ParseProfile checks a profile name given by a user.
func ParseProfile(s string) (Profile, error) {
	switch p := Profile(s); p {
	case ProfileAuto, ProfileH5MD, ProfileTrajvault:
		return p, nil
	}
	return "", fmt.Errorf("unknown rule profile %q; use h5md (what the H5MD specification requires) or trajvault (trajvault's stricter layout)", s)
}

// Select resolves ProfileAuto for an open file: a file that claims
// trajvault's layout - it declares the trajvault_electronic module or
// carries trajvault's provenance record - is checked under the trajvault
// profile, any other under h5md.
func Select(f *h5.File, p Profile) Profile {
	if p != ProfileAuto {
		return p
	}
	if f.Kind(trajfile.OurModule) == h5.Group || f.HasAttr(trajfile.ParametersGroup, trajfile.ProvenanceAttr) {
		return ProfileTrajvault
	}
	return ProfileH5MD
}

// RuleProfiles names the profile of every code: codes of ProfileH5MD
// are checked on every file, codes of ProfileTrajvault only under the
// trajvault profile. schema/layout.md shows the same in its Profile
// column (TestProfilesDocumented).
var RuleProfiles = map[string]Profile{}

func init() {
	for _, c := range []string{"V1", "V2", "V3", "V5", "V6", "V7", "V8", "V9", "V10", "V11", "V12", "V13", "V14",
		"V15", "V17", "V18", "V19", "V22", "V28", "V29", "V30", "V31", "V32", "V33", "V35", "V36", "V37", "V38", "V40",
		"V42", "V43", "V44", "X1", "X2", "X3"} {
		RuleProfiles[c] = ProfileH5MD
	}
	for _, c := range []string{"V20", "V25", "V26", "V27", "V34", "V39", "V41", "V45",
		"E1", "E2", "E3", "E4", "E5", "E6", "E7", "E8", "E9", "E10", "E11",
		"R1", "R2", "R3", "R4", "R5", "R6", "R7"} {
		RuleProfiles[c] = ProfileTrajvault
	}
}

// File validates the file at path. The error is non-nil only when the file
// cannot be read at all (missing, empty, not HDF5, damaged); rule
// violations are findings in the report.
func File(path string, opt Options) (*Report, error) {
	f, err := openFile(path, opt)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return Opened(f, path, opt), nil
}

// Opened validates an already opened file (e.g. one read from an archive
// into memory); name is what the report calls it.
func Opened(f *h5.File, path string, opt Options) *Report {
	p := Select(f, opt.Profile)
	rep := &Report{
		Tool:          Tool{Name: "trajvault", Version: opt.ToolVersion},
		File:          path,
		LayoutVersion: schema.Current().Version,
		Profile:       string(p),
	}
	rep.Findings = check(f, "", p)
	rep.finish()
	return rep
}

// check runs the file rules of profile p (ProfileAuto: Select) on f;
// file (may be "") goes into each finding's location, for files inside a
// bundle.
func check(f *h5.File, file string, p Profile) []finding.Finding {
	c := &checker{f: f, file: file, layout: schema.Current(), list: &finding.List{PerPlace: perPlace}, profile: Select(f, p)}
	c.run()
	return c.list.Findings()
}

type checker struct {
	f       *h5.File
	file    string
	layout  *schema.Layout
	list    *finding.List
	profile Profile // never ProfileAuto

	fixedStrings []string // string attributes stored fixed-length (V39)

	minor       int  // H5MD minor version
	unitAttrs   bool // some dataset has a unit attribute
	unitsModule bool
	nStates     int // from /parameters/n_states; 0 unknown
}

func (c *checker) add(code string, sev finding.Severity, path, format string, args ...any) {
	if RuleProfiles[code] == ProfileTrajvault && c.profile != ProfileTrajvault {
		return
	}
	c.list.Addf(code, sev, finding.Location{File: c.file, Path: path}, format, args...)
}

func (c *checker) errorf(code, path, format string, args ...any) {
	c.add(refine(code, args), finding.Error, path, format, args...)
}

func (c *checker) warnf(code, path, format string, args ...any) {
	c.add(code, finding.Warning, path, format, args...)
}

func (c *checker) notef(code, path, format string, args ...any) {
	c.add(code, finding.Note, path, format, args...)
}

// attrPath names an attribute in findings: object@name.
func attrPath(obj, name string) string { return obj + "@" + name }

func (c *checker) run() {
	if c.f.Kind(trajfile.H5MDGroup) != h5.Group {
		c.errorf("V1", trajfile.H5MDGroup, "no %s group at the root: this is not an H5MD file; write the H5MD header (version, author, creator), e.g. with trajvault convert", trajfile.H5MDGroup)
		return
	}
	c.header()
	c.walk(trajfile.Root, map[h5.ObjectID]bool{})
	if c.unitAttrs && !c.unitsModule {
		c.warnf("V19", trajfile.UnitsModule, "datasets carry unit attributes but the units module is not declared; add group %s with version=(1,0) and system=\"SI\"", trajfile.UnitsModule)
	}
	c.parameters()
	if c.f.Kind(trajfile.ParticlesGroup) == h5.Group {
		groups, err := c.f.Links(trajfile.ParticlesGroup)
		if err != nil {
			c.errorf("V33", trajfile.ParticlesGroup, "cannot list the particle groups (damaged file?): %v", err)
		}
		for _, g := range groups {
			c.particles(trajfile.ParticleGroup(g))
		}
	} else if !c.hasObservables() {
		// H5MD 1.1.0, "General organization": only the h5md group is
		// mandatory at the root, so a run of observables alone (energies,
		// electronic states) is a valid file without /particles.
		c.errorf("V41", trajfile.ParticlesGroup, "no %s group and no %s: the file holds no data; write positions (%s/<group>/position with species and masses) or, for a run without geometry, energies or states under %s", trajfile.ParticlesGroup, trajfile.ObservablesGroup, trajfile.ParticlesGroup, trajfile.ObservablesGroup)
	}
	c.observables()
	c.electronic()
	c.connectivity()
	c.provenance()
	c.reportFixedStrings()
}

// hasObservables reports whether /observables holds at least one
// time-dependent element (a group with a value dataset).
func (c *checker) hasObservables() bool {
	if c.f.Kind(trajfile.ObservablesGroup) != h5.Group {
		return false
	}
	names, _ := c.f.Links(trajfile.ObservablesGroup)
	for _, n := range names {
		if c.f.Kind(trajfile.ObservablesGroup+"/"+n+trajfile.Value) == h5.Dataset {
			return true
		}
	}
	return false
}

// ---------------------------------------------------------------- header

// stringAttr reads a scalar string attribute, reporting code (missing or
// not a scalar string) and V39 (fixed-length).
func (c *checker) stringAttr(path, name, code string) (string, bool) {
	at := attrPath(path, name)
	if !c.f.HasAttr(path, name) {
		c.errorf(code, at, "missing; add a scalar string attribute %q to %s", name, path)
		return "", false
	}
	a, err := c.f.Attr(path, name)
	if err != nil || a.Type.Class != h5.ClassString || len(a.Strings) == 0 {
		c.errorf(code, at, "must be a string, found %s; rewrite it as a scalar string", a.Type)
		return "", false
	}
	if a.Shape.Rank != 0 {
		c.errorf(code, at, "must be a scalar string, found shape %s", a.Shape)
	}
	c.fixedString(at, a)
	return a.Strings[0], true
}

// version reads an integer[2] version attribute.
func (c *checker) version(path, code string) ([]int64, bool) {
	at := attrPath(path, trajfile.VersionAttr)
	if !c.f.HasAttr(path, trajfile.VersionAttr) {
		c.errorf(code, at, "missing; add an integer[2] attribute version, e.g. (1, 0)")
		return nil, false
	}
	a, err := c.f.Attr(path, trajfile.VersionAttr)
	if err != nil || a.Type.Class != h5.ClassInt || a.Shape.Rank != 1 || len(a.Ints) != 2 {
		c.errorf(code, at, "must be integer[2], found %s %s; write it as two integers (major, minor)", a.Type, a.Shape)
		return nil, false
	}
	return a.Ints, true
}

func (c *checker) header() {
	at := attrPath(trajfile.H5MDGroup, trajfile.VersionAttr)
	if v, ok := c.version(trajfile.H5MDGroup, "V2"); ok {
		switch {
		case v[0] != 1:
			c.errorf("V2", at, "H5MD version %d.%d is unknown; this validator reads major version 1", v[0], v[1])
		case v[1] != 0 && v[1] != 1:
			c.errorf("V2", at, "H5MD version 1.%d is unknown; expected 1.0 or 1.1", v[1])
		default:
			c.minor = int(v[1])
		}
	} else {
		c.minor = 1
	}
	for _, g := range []string{trajfile.AuthorGroup, trajfile.CreatorGroup} {
		if c.f.Kind(g) != h5.Group {
			c.errorf("V3", g, "group missing; H5MD requires %s with a name attribute", g)
		}
	}
	if c.f.Kind(trajfile.AuthorGroup) == h5.Group {
		c.stringAttr(trajfile.AuthorGroup, trajfile.NameAttr, "V3")
		if c.f.HasAttr(trajfile.AuthorGroup, trajfile.EmailAttr) {
			c.stringAttr(trajfile.AuthorGroup, trajfile.EmailAttr, "V3")
		}
	}
	if c.f.Kind(trajfile.CreatorGroup) == h5.Group {
		c.stringAttr(trajfile.CreatorGroup, trajfile.NameAttr, "V3")
		c.stringAttr(trajfile.CreatorGroup, trajfile.VersionAttr, "V3")
	}
	if c.f.Kind(trajfile.ModulesGroup) != h5.Group {
		return
	}
	mods, _ := c.f.Links(trajfile.ModulesGroup)
	for _, m := range mods {
		p := trajfile.ModulesGroup + "/" + m
		if c.f.Kind(p) != h5.Group {
			c.errorf("V5", p, "a module must be a group with a version attribute")
			continue
		}
		v, ok := c.version(p, "V5")
		if m == trajfile.UnitsModuleName {
			c.unitsModule = true
			if c.f.HasAttr(p, trajfile.SystemAttr) {
				c.stringAttr(p, trajfile.SystemAttr, "V3")
			}
		}
		if m == c.layout.Module.Name && ok {
			want := c.layout.Module.Version
			if int(v[0]) != want[0] || int(v[1]) > want[1] {
				c.errorf("E11", attrPath(p, trajfile.VersionAttr), "module version %d.%d is not known to this build (knows %d.%d); upgrade trajvault", v[0], v[1], want[0], want[1])
			}
		}
	}
}

// ourModule reports whether the file declares trajvault's module, so
// that the trajvault profile's rules (provenance) apply to it.
func (c *checker) ourModule() bool { return c.f.Kind(trajfile.OurModule) == h5.Group }

// ---------------------------------------------------------------- walk

// walk visits every object once (groups are tracked by identity, so hard
// links and cycles are safe): unit strings (V18), filters (V28), finite
// values (V26), links that lead nowhere (V30) or out of the file (V31).
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
			c.errorf("V33", path, "cannot list group members (damaged file?): %v", err)
			return
		}
		for _, l := range links {
			child := strings.TrimSuffix(path, "/") + "/" + l
			if c.f.Kind(child) == h5.Missing {
				// Listed by its group but not readable: a damaged object
				// header. Say so rather than skip it.
				c.errorf("V33", child, "linked from %s but the object cannot be read (damaged file?); restore the file from its source", path)
				continue
			}
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
		c.warnf("V30", path, "soft link points nowhere; remove it or restore its target")
	case h5.ExternalLink:
		c.warnf("V31", path, "external link to another file; a deposit should be self-contained: copy the data in")
	}
}

func (c *checker) unitAttr(path string) {
	if !c.f.HasAttr(path, trajfile.UnitAttr) {
		return
	}
	c.unitAttrs = true
	at := attrPath(path, trajfile.UnitAttr)
	a, err := c.f.Attr(path, trajfile.UnitAttr)
	if err != nil || a.Type.Class != h5.ClassString || len(a.Strings) != 1 {
		c.errorf("V18", at, "unit must be a scalar string, found %s %s", a.Type, a.Shape)
		return
	}
	c.fixedString(at, a)
	u, perr := units.Parse(a.Strings[0])
	switch {
	case errors.Is(perr, units.ErrSyntax):
		c.errorf("V18", at, "%v", perr)
	case errors.Is(perr, units.ErrUnknown):
		c.warnf("V18", at, "%v", perr)
	case perr == nil && u.Alias:
		c.warnf("V38", at, "unit %q is read as %q, but it is not the canonical spelling; write %q", u.Text, u.Canonical, u.Canonical)
	}
}

// fixedString checks V39 (trajvault profile): a string attribute is
// stored as a variable-length string, which h5py returns as str; a
// fixed-length one comes back as bytes, and a common Python analysis
// library's H5MD reader then fails to match unit names.
// They are reported once per file (report, at the end of run).
func (c *checker) fixedString(at string, a h5.Attr) {
	if a.Type.Class == h5.ClassString && !a.Type.VarLen {
		c.fixedStrings = append(c.fixedStrings, at)
	}
}

func (c *checker) reportFixedStrings() {
	n := len(c.fixedStrings)
	if n == 0 {
		return
	}
	what := "a fixed-length string"
	if n > 1 {
		what = fmt.Sprintf("a fixed-length string, like %d more string attributes of the file", n-1)
	}
	c.warnf("V39", c.fixedStrings[0], "%s: h5py returns such strings as bytes, not str, and a common Python H5MD reader then fails on the units; rewrite them as variable-length UTF-8 strings (trajvault writes them so)", what)
}

// physical reports whether a dataset holds a physical quantity (V26).
func physical(path string) bool {
	for _, g := range []string{trajfile.ParticlesGroup, trajfile.ObservablesGroup, trajfile.ParametersGroup} {
		if strings.HasPrefix(path, g+"/") {
			return true
		}
	}
	return false
}

func (c *checker) dataset(path string) {
	info, err := c.f.Info(path)
	if err != nil {
		c.errorf("V33", path, "cannot read the dataset description (damaged file?): %v", err)
		return
	}
	foreign := ""
	for _, fl := range info.Filters {
		if !fl.Stock() {
			foreign = fmt.Sprintf("filter %d (%s)", fl.ID, fl.Name)
			c.warnf("V28", path, "%s is not built into every HDF5 library; readers need a plugin; repack with deflate, shuffle or scale-offset", foreign)
		}
	}
	if c.f.HasAttr(path, trajfile.ToleranceAttr) {
		if a, err := c.f.Attr(path, trajfile.ToleranceAttr); err == nil && len(a.Floats) == 1 {
			c.warnf("V29", path, "stored lossily: values are within +-%g (in the dataset's unit) of the source, as the writer states; export cannot give back more digits", a.Floats[0])
		} else {
			c.errorf("V29", path, "trajvault_tolerance must be one float, the absolute bound of the lossy storage")
		}
	}
	negZeros := c.negativeZeros(path, info)
	if info.Type.Class != h5.ClassFloat || !physical(path) || info.Shape.Len() == 0 || c.unwritten(path, info) {
		return
	}
	bad, first := 0, -1
	notZero, firstNZ, nz := 0, int64(-1), 0
	err = c.scan(path, info, func(block []float64, row0, rowLen int) {
		for i, x := range block {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				if bad == 0 {
					first = row0 + i/max(rowLen, 1)
				}
				bad++
			}
		}
		// The listed negative zeros of this block must be zeros.
		base, end := int64(row0)*int64(rowLen), int64(row0)*int64(rowLen)+int64(len(block))
		for ; nz < len(negZeros) && negZeros[nz] < end; nz++ {
			if j := negZeros[nz] - base; j >= 0 && block[j] != 0 {
				if notZero == 0 {
					firstNZ = negZeros[nz]
				}
				notZero++
			}
		}
	})
	if notZero > 0 {
		c.errorf("V45", path, "%s lists %d values that are not zero (first at flat index %d); the list or the data was changed after writing: rewrite the file from its source", trajfile.NegativeZerosAttr, notZero, firstNZ)
	}
	if err != nil && foreign != "" {
		c.errorf("V28", path, "cannot decode the data: %s is not available to this HDF5 library; repack the dataset with stock filters", foreign)
		return
	}
	if err != nil {
		c.errorf("V33", path, "cannot read the data (damaged or truncated file?): %v", err)
		return
	}
	if bad > 0 {
		c.errorf("V26", path, "%d non-finite values (NaN or Inf), first in row %d; the run diverged or the log was cut: trim the frames or mark the trajectory as failed", bad, first)
	}
}

// negativeZeros checks the list of printed negative zeros of a
// scale-offset dataset (trajfile.NegativeZerosAttr, V45: integer flat
// indices within the dataset, strictly increasing) and returns it, or
// nil when it is absent or unusable.
func (c *checker) negativeZeros(path string, info h5.DatasetInfo) []int64 {
	if !c.f.HasAttr(path, trajfile.NegativeZerosAttr) {
		return nil
	}
	a, err := c.f.Attr(path, trajfile.NegativeZerosAttr)
	if err != nil || a.Type.Class != h5.ClassInt || a.Shape.Rank > 1 {
		c.errorf("V45", path, "%s must be a list of integers (flat indices of the values printed as -0); rewrite the file from its source", trajfile.NegativeZerosAttr)
		return nil
	}
	n := int64(info.Shape.Len())
	for i, k := range a.Ints {
		if k < 0 || k >= n || (i > 0 && k <= a.Ints[i-1]) {
			c.errorf("V45", path, "%s entry %d is %d: indices must increase and lie within the dataset's %d values; rewrite the file from its source", trajfile.NegativeZerosAttr, i, k, n)
			return nil
		}
	}
	return a.Ints
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
