package validate

import (
	"errors"

	"trajvault/internal/h5"
	"trajvault/internal/trajfile"
	"trajvault/provenance"
)

// recipeRole is the role of the recipe among a record's sources
// (ingest's hashSources).
const recipeRole = "recipe"

// unitKinds maps the stored quantities to the unit kinds a provenance
// record names (provenance.Record.Units): the unit each was stored in.
var unitKinds = []struct{ value, kind string }{
	{trajfile.Particle(trajfile.OurGroup, trajfile.Position) + trajfile.Value, "position"},
	{trajfile.Particle(trajfile.OurGroup, trajfile.Velocity) + trajfile.Value, "velocity"},
	{trajfile.Particle(trajfile.OurGroup, trajfile.Force) + trajfile.Value, "force"},
	{trajfile.KineticEnergy + trajfile.Value, "energy"},
	{trajfile.PotentialEnergy + trajfile.Value, "energy"},
	{trajfile.TotalEnergy + trajfile.Value, "energy"},
	{trajfile.StateEnergies + trajfile.Value, "energy"},
	{trajfile.Particle(trajfile.OurGroup, trajfile.Position) + trajfile.Time, "time"},
}

// provenance checks the trajvault profile's provenance rules (R1-R7) on
// files that carry trajvault's module or a provenance record: the record
// parses, names its sources with well-formed SHA-256 digests, embeds the
// recipe it used, names the unit of every stored quantity, the tool
// version and the constant set.
func (c *checker) provenance() {
	at := attrPath(trajfile.ParametersGroup, trajfile.ProvenanceAttr)
	rec, err := provenance.Read(c.f, "")
	switch {
	case errors.Is(err, provenance.ErrMissing):
		if c.ourModule() {
			c.notef("R1", at, "no provenance record: the file does not say which logs it came from; files made by trajvault convert or pack carry one")
		}
		return
	case err != nil:
		c.errorf("R2", at, "unreadable provenance record: %v; rewrite it with trajvault convert", err)
		return
	}
	if len(rec.Sources) == 0 {
		c.errorf("R3", at, "the record lists no source files; convert again so that every log is hashed")
	}
	usedRecipe := false
	for i, s := range rec.Sources {
		switch {
		case s.Path == "" || s.Role == "":
			c.errorf("R3", at, "source %d has no path or role; every source names its file and role (geometry, table, log, recipe)", i+1)
		case !provenance.ValidSHA256(s.SHA256):
			c.errorf("R3", at, "source %d (%s): sha256 %q is not 64 lowercase hexadecimal digits", i+1, s.Path, s.SHA256)
		}
		usedRecipe = usedRecipe || s.Role == recipeRole
	}
	if usedRecipe && rec.Recipe == "" {
		c.errorf("R4", at, "a recipe is listed among the sources but its text is not embedded; the record must carry the recipe it used")
	}
	for _, q := range unitKinds {
		if c.f.Kind(q.value) != h5.Dataset || !c.f.HasAttr(q.value, trajfile.UnitAttr) {
			continue
		}
		a, err := c.f.Attr(q.value, trajfile.UnitAttr)
		if err != nil || len(a.Strings) != 1 {
			continue // V18 reports it
		}
		switch u, ok := rec.Units[q.kind]; {
		case !ok || u == "":
			c.errorf("R5", at, "no unit for %s, stored at %s in %q; the record names the unit of every stored quantity", q.kind, q.value, a.Strings[0])
		case u != a.Strings[0]:
			c.errorf("R5", at, "records %s in %q but %s is stored in %q; one of them is wrong", q.kind, u, q.value, a.Strings[0])
		}
	}
	if rec.Tool == "" || rec.ToolVersion == "" {
		c.errorf("R6", at, "the record lacks the tool or its version (tool %q, tool_version %q)", rec.Tool, rec.ToolVersion)
	}
	if rec.ConstantSet == "" {
		c.errorf("R7", at, "the record does not name the constant set behind its unit conversions")
	}
}
