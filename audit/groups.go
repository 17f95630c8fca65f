package audit

import (
	"trajvault/internal/finding"
	"trajvault/internal/trajfile"
)

// target is one particle group of one file to audit.
type target struct {
	path string
	s    Settings // s.Group names the group; "" the file's default
}

// targets expands files into the particle groups to audit: the group
// Settings.Group names, else every group of a file with several (H5MD
// 1.1 allows any number, any names), one result each. A file whose
// groups cannot be listed stays one target, so that opening it reports
// why (A10).
func targets(paths []string, s Settings) []target {
	var out []target
	for _, p := range paths {
		groups, err := trajfile.Groups(p)
		if s.Group != "" || err != nil || len(groups) < 2 {
			out = append(out, target{p, s})
			continue
		}
		for _, g := range groups {
			one := s
			one.Group = g
			out = append(out, target{p, one})
		}
	}
	return out
}

// Attention is the part of this trajectory's findings a reader must
// look at (as Report.Attention): its failed, warned and cannot-tell
// checks, or why it could not be audited.
func (t *Result) Attention() []finding.Finding {
	if t.Error != "" {
		return []finding.Finding{{Code: FileUnreadable, Severity: finding.Error,
			Location: finding.Location{File: t.File}, Message: "cannot audit: " + t.Error}}
	}
	var out []finding.Finding
	for _, c := range t.Checks {
		if c.Verdict == Fail || c.Verdict == Warn || c.Verdict == Unknown {
			out = append(out, checkFinding(t.File, c))
		}
	}
	return out
}

// onePerFile keeps the per-file series of the observables (active state,
// populations) only in the first group's result of each file: they
// belong to the whole system, not to a particle group, and the ensemble
// checks count each trajectory once (a file named twice stays counted
// twice, as before).
func onePerFile(res []*Result) {
	first := map[string]string{} // file -> group of its first result
	for _, r := range res {
		g, ok := first[r.File]
		if !ok {
			first[r.File] = r.Group
			continue
		}
		if g != r.Group {
			r.Active, r.Pops, r.pops = nil, nil, nil
		}
	}
}
