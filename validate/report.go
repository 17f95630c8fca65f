// Package validate checks one trajectory file against H5MD 1.1 and the
// trajvault layout (schema/layout.md), and deposit bundles against BagIt,
// RO-Crate and DataCite. Every finding is a finding.Finding with a stable
// code from the rules tables in layout.md (one code per rule), a
// severity, where it is (the HDF5 path, and in a bundle the file) and a
// message that says what to do.
package validate

import (
	"fmt"
	"sort"
	"strings"

	"trajvault/internal/finding"
)

// Tool names the program that made a report.
type Tool struct {
	Name    string `json:"name"`
	Version string `json:"version"`
}

// Report is the result for one file or bundle; its JSON form is
// described by schema/findings.schema.json.
type Report struct {
	Tool          Tool              `json:"tool"`
	File          string            `json:"file"`
	LayoutVersion string            `json:"layout_version"`
	Profile       string            `json:"profile,omitempty"` // rules checked: h5md or trajvault (files only)
	Errors        int               `json:"errors"`
	Warnings      int               `json:"warnings"`
	Notes         int               `json:"notes,omitempty"`
	Findings      []finding.Finding `json:"findings"`
}

// OK reports whether the file has no errors.
func (r *Report) OK() bool { return r.Errors == 0 }

// Has reports whether a finding with code is present.
func (r *Report) Has(code string) bool {
	for _, f := range r.Findings {
		if f.Code == code {
			return true
		}
	}
	return false
}

// perPlace is how many findings of one rule at one place are printed; the
// last printed one counts the rest ("and N more like this").
const perPlace = 1

// finish sorts findings (errors first, then by file, path and code in
// numeric order) so the same file always gives the same report, and
// counts them, folded repeats included.
func (r *Report) finish() {
	sort.SliceStable(r.Findings, func(i, j int) bool {
		a, b := r.Findings[i], r.Findings[j]
		if ra, rb := rank(a.Severity), rank(b.Severity); ra != rb {
			return ra < rb
		}
		if a.File != b.File {
			return a.File < b.File
		}
		if a.Path != b.Path {
			return a.Path < b.Path
		}
		return codeLess(a.Code, b.Code)
	})
	r.Errors = finding.Count(r.Findings, finding.Error)
	r.Warnings = finding.Count(r.Findings, finding.Warning)
	r.Notes = finding.Count(r.Findings, finding.Note)
	if r.Findings == nil {
		r.Findings = []finding.Finding{}
	}
}

func rank(s finding.Severity) int {
	switch s {
	case finding.Error:
		return 0
	case finding.Warning:
		return 1
	}
	return 2
}

// codeLess orders codes by family (V, E, R, B, M) and then by number.
func codeLess(a, b string) bool {
	const families = "VERBM"
	if a == "" || b == "" {
		return a < b
	}
	if a[0] != b[0] {
		return strings.IndexByte(families, a[0]) < strings.IndexByte(families, b[0])
	}
	var x, y int
	fmt.Sscan(a[1:], &x)
	fmt.Sscan(b[1:], &y)
	return x < y
}

// Codes lists every rule code the file checks can report. The tests check
// that layout.md documents each one and that a fixture makes each fire.
// Codes are never reused: V4, V16, V21, V23 and V24 are retired.
var Codes = []string{
	"V1", "V2", "V3", "V5", "V6", "V7", "V8", "V9", "V10", "V11", "V12", "V13", "V14",
	"V15", "V17", "V18", "V19", "V20", "V22", "V25", "V26", "V27", "V28", "V29",
	"V30", "V31", "V32", "V33", "V34", "V35", "V36", "V37", "V38", "V39", "V40", "V41", "V45",
	"E1", "E2", "E3", "E4", "E5", "E6", "E7", "E8", "E9", "E10", "E11",
	"R1", "R2", "R3", "R4", "R5", "R6", "R7",
}

// BundleCodes are the codes of bundle checks (internal/bagit and
// bundle.go); layout.md documents them too.
var BundleCodes = []string{"B1", "B2", "B3", "B4", "B5", "B6", "B7", "B8", "B9", "B10", "B11", "B12", "B13", "B14", "B15", "B16", "B17", "B18", "B19", "M1", "M2", "M3"}
