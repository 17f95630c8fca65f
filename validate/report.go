// Package validate checks one trajectory file against H5MD 1.1 and the
// trajvault layout (schema/layout.md). Every finding carries a stable code
// from the rules table in layout.md, a severity, the HDF5 path it concerns
// and a message that says what to do.
package validate

import (
	"fmt"
	"sort"
	"strings"
)

// Severity of a finding: errors make a file fail, warnings do not.
type Severity string

const (
	Error   Severity = "error"
	Warning Severity = "warning"
)

// Finding is one rule violation.
type Finding struct {
	Code     string   `json:"code"`
	Severity Severity `json:"severity"`
	Path     string   `json:"path"`
	Message  string   `json:"message"`
}

func (f Finding) String() string {
	return fmt.Sprintf("%-7s %-4s %s: %s", f.Severity, f.Code, f.Path, f.Message)
}

// Tool names the program that made a report.
type Tool struct {
	Name    string `json:"name"`
	Version string `json:"version"`
}

// Report is the result for one file; its JSON form is described by
// schema/findings.schema.json.
type Report struct {
	Tool          Tool      `json:"tool"`
	File          string    `json:"file"`
	LayoutVersion string    `json:"layout_version"`
	Errors        int       `json:"errors"`
	Warnings      int       `json:"warnings"`
	Findings      []Finding `json:"findings"`
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

// finish sorts findings (errors first, then by path and code) so the same
// file always gives the same report, and counts them.
func (r *Report) finish() {
	sort.SliceStable(r.Findings, func(i, j int) bool {
		a, b := r.Findings[i], r.Findings[j]
		if a.Severity != b.Severity {
			return a.Severity == Error
		}
		if a.Path != b.Path {
			return a.Path < b.Path
		}
		return codeLess(a.Code, b.Code)
	})
	r.Errors, r.Warnings = 0, 0
	for _, f := range r.Findings {
		if f.Severity == Error {
			r.Errors++
		} else {
			r.Warnings++
		}
	}
	if r.Findings == nil {
		r.Findings = []Finding{}
	}
}

func codeLess(a, b string) bool {
	if a[0] != b[0] {
		return strings.IndexByte("VEBM", a[0]) < strings.IndexByte("VEBM", b[0])
	}
	var x, y int
	fmt.Sscan(a[1:], &x)
	fmt.Sscan(b[1:], &y)
	return x < y
}

// Codes lists every rule code this package can report, with the severity
// it reports it at. The test checks that layout.md documents each one.
var Codes = []string{
	"V1", "V2", "V3", "V4", "V5", "V6", "V7", "V8", "V9", "V10", "V11", "V12", "V13", "V14",
	"V15", "V17", "V18", "V19", "V20", "V22", "V25", "V26", "V27", "V28", "V29",
	"E1", "E2", "E3", "E4", "E5", "E6", "E7", "E8", "E9", "E10",
}

// BundleCodes are the codes of bundle checks (internal/bagit and
// bundle.go); layout.md documents them too.
var BundleCodes = []string{"B1", "B2", "B3", "B4", "B5", "B6", "B7", "B8", "B9", "B10", "B11", "B12", "B13", "M1", "M2", "M3"}
