package compare

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"strings"

	"trajvault/provenance"
)

// provenanceDiff compares the conversion records of two files
// (/parameters@trajvault_provenance): the converter and its version, the
// units and constants, how each quantity was printed and stored, and the
// recipe. Times, command lines and source hashes differ between any two
// runs and are left out.
func provenanceDiff(a, b string) []SetupDiff {
	if a == "" && b == "" {
		return nil
	}
	var ra, rb provenance.Record
	okA := a != "" && json.Unmarshal([]byte(a), &ra) == nil
	okB := b != "" && json.Unmarshal([]byte(b), &rb) == nil
	if !okA || !okB {
		return []SetupDiff{{"provenance record", present(a, okA), present(b, okB)}}
	}
	var out []SetupDiff
	add := func(item, x, y string) {
		if x != y {
			out = append(out, SetupDiff{item, x, y})
		}
	}
	add("converter", ra.Tool+" "+ra.ToolVersion, rb.Tool+" "+rb.ToolVersion)
	add("constants", ra.ConstantSet, rb.ConstantSet)
	add("conversions", strings.Join(ra.Conversions, "; "), strings.Join(rb.Conversions, "; "))
	out = append(out, diffMaps("recorded unit of ", ra.Units, rb.Units)...)
	out = append(out, diffMaps("storage of ", ra.Storage, rb.Storage)...)
	add("recipe (SHA-256)", digest(ra.Recipe), digest(rb.Recipe))
	return out
}

// digest names a recipe text by the start of its SHA-256 (FIPS 180-4).
func digest(s string) string {
	if s == "" {
		return "(none)"
	}
	h := sha256.Sum256([]byte(s))
	return hex.EncodeToString(h[:6])
}

func present(s string, ok bool) string {
	switch {
	case s == "":
		return "(none)"
	case !ok:
		return "(not valid JSON)"
	}
	return "present"
}
