package main

import (
	"encoding/json"
	"path/filepath"
	"testing"
)

// TestJSONEnvelope: the commands that report what they wrote or checked
// print one JSON document with the tool, the command, ok, the findings
// and the result, and ok agrees with the exit status (issue 15).
func TestJSONEnvelope(t *testing.T) {
	dir, deposit := packFixture(t, "1", "100")
	tmpl := filepath.Join(dir, "template.yaml")
	cases := []struct {
		name     string
		args     []string
		wantCode int
		wantOK   bool
	}{
		{"demo", []string{"demo", "--json", "--trajectories", "1", "--steps", "50", filepath.Join(dir, "h5")}, 0, true},
		{"init", []string{"init", tmpl, "--json"}, 0, true},
		{"init --check", []string{"init", "--check", tmpl, "--json"}, exitFindings, false},
		{"init --check", []string{"init", "--check", deposit, "--json"}, 0, true},
		{"pack", []string{"pack", filepath.Join(dir, "logs"), "-o", filepath.Join(dir, "bag"), "--deposit", deposit,
			"--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--no-audit", "--json"}, 0, true},
		{"export", []string{"export", filepath.Join(dir, "bag", "data", "trajectories", "traj-001.h5"), "-o", filepath.Join(dir, "x"), "--json"}, 0, true},
	}
	for _, c := range cases {
		code, out, errs := runCLI(c.args...)
		if code != c.wantCode {
			t.Errorf("%s: exit %d, want %d\n%s%s", c.name, code, c.wantCode, out, errs)
			continue
		}
		var e struct {
			Tool     struct{ Name, Version string }
			Command  string
			OK       *bool
			Findings []map[string]any
			Result   map[string]any
		}
		if err := json.Unmarshal([]byte(out), &e); err != nil {
			t.Errorf("%s: stdout is not one JSON document: %v\n%s", c.name, err, out)
			continue
		}
		if e.Tool.Name != "trajvault" || e.Tool.Version == "" || e.Command != c.name || e.OK == nil || *e.OK != c.wantOK || e.Findings == nil {
			t.Errorf("%s: envelope %+v", c.name, e)
		}
		for _, f := range e.Findings {
			if f["code"] == "" || f["severity"] == "" || f["message"] == "" {
				t.Errorf("%s: finding without code, severity or message: %v", c.name, f)
			}
		}
	}
}
