package audit

import (
	"trajvault/internal/finding"
)

// severity maps a verdict to a finding severity: fail is an error, warn
// a warning, and ok, unknown and n/a are notes whose message says which.
func severity(v Verdict) (finding.Severity, string) {
	switch v {
	case Fail:
		return finding.Error, ""
	case Warn:
		return finding.Warning, ""
	case OK:
		return finding.Note, "pass: "
	case Unknown:
		return finding.Note, "cannot tell: "
	}
	return finding.Note, "not run: "
}

// checkFinding is the finding for one check's verdict; file is empty for
// an ensemble check.
func checkFinding(file string, c Check) finding.Finding {
	sev, prefix := severity(c.Verdict)
	f := finding.Finding{Code: c.Code, Severity: sev, Location: finding.Location{File: file, Path: c.path},
		Message: c.Name + ": " + prefix + c.Summary}
	if spec, ok := Lookup(c.Name); ok {
		f.Quantity = spec.Quantity
	}
	return f
}

// findings lists, in input order, one finding per check of each
// trajectory whose verdict keep accepts, one for each file that could
// not be audited, then one per ensemble check (the "flagged" counts
// summarise the per-file findings and are not repeated).
func (rep *Report) findings(keep func(Verdict) bool) []finding.Finding {
	out := []finding.Finding{}
	for _, t := range rep.Trajectories {
		if t.Error != "" {
			out = append(out, finding.Finding{Code: FileUnreadable, Severity: finding.Error,
				Location: finding.Location{File: t.File}, Message: "cannot audit: " + t.Error})
			continue
		}
		for _, c := range t.Checks {
			if keep(c.Verdict) {
				out = append(out, checkFinding(t.File, c))
			}
		}
	}
	for _, c := range rep.Ensemble {
		if _, ok := Lookup(c.Name); ok && keep(c.Verdict) {
			out = append(out, checkFinding("", c))
		}
	}
	return out
}

// Attention is the part of the findings a reader must look at: every
// failed or warned check, every check whose data could not tell, and
// every file that could not be audited.
func (rep *Report) Attention() []finding.Finding {
	return rep.findings(func(v Verdict) bool { return v == Fail || v == Warn || v == Unknown })
}
