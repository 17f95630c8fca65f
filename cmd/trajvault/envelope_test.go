package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/finding"
	"trajvault/schema"
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

// envDoc is the envelope as tests read it; Result is decoded per command.
type envDoc struct {
	Tool     toolInfo
	Command  string
	OK       bool
	Findings []finding.Finding
	Result   json.RawMessage
}

// readEnvelope checks that out is exactly one JSON document that follows
// schema/envelope.schema.json (JSON Schema draft 2020-12) and decodes it;
// result, when not nil, receives the command's result.
func readEnvelope(t *testing.T, out string, result any) envDoc {
	t.Helper()
	sch, err := schema.EnvelopeSchema()
	if err != nil {
		t.Fatal(err)
	}
	dec := json.NewDecoder(strings.NewReader(out))
	var doc any
	if err := dec.Decode(&doc); err != nil {
		t.Fatalf("stdout is not JSON: %v\n%s", err, out)
	}
	if dec.More() {
		t.Fatalf("stdout holds more than one JSON document:\n%s", out)
	}
	if err := sch.Validate(doc); err != nil {
		t.Errorf("envelope does not follow envelope.schema.json: %v\n%s", err, out)
	}
	var e envDoc
	if err := json.Unmarshal([]byte(out), &e); err != nil {
		t.Fatal(err)
	}
	if result != nil {
		if err := json.Unmarshal(e.Result, result); err != nil {
			t.Fatalf("result: %v\n%s", err, e.Result)
		}
	}
	return e
}

// TestJSONEnvelopeData: the commands whose output is data (validate, scan,
// convert, inspect, audit, compare) print the same one envelope as the
// others, whatever the number of inputs, and ok agrees with the exit
// status (issue 15: validate wrote JSON lines, scan a bare array,
// inspect, audit and compare documents of their own).
func TestJSONEnvelopeData(t *testing.T) {
	dir := t.TempDir()
	logs := filepath.Join(dir, "logs")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "2", "--steps", "60", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	h5 := demoDir(t, 1, 2, 200)
	a, b := filepath.Join(h5, "traj-001.h5"), filepath.Join(h5, "traj-002.h5")
	recipe := repo("testdata", "recipes", "tarnol.yaml")
	cases := []struct {
		name     string
		args     []string
		wantCode int
	}{
		{"validate", []string{"validate", "--json", a, b}, 0},
		{"validate", []string{"validate", "--json", h5}, 0},
		{"scan", []string{"scan", "--json", "--recipe", recipe, logs}, 0},
		{"scan", []string{"scan", "--json", "--unit", "position=angstrom", repo("testdata", "ensembles", "problems")}, 1},
		{"convert", []string{"convert", "--json", "--recipe", recipe, logs, "-o", filepath.Join(dir, "h5")}, 0},
		{"inspect", []string{"inspect", "--json", a}, 0},
		{"inspect", []string{"inspect", "--json", a, b}, 0},
		{"audit", []string{"audit", "--json", h5}, 0},
		{"compare", []string{"compare", "--json", h5, h5}, 0},
	}
	for _, c := range cases {
		code, out, errs := runCLI(c.args...)
		if code != c.wantCode {
			t.Errorf("%v: exit %d, want %d\n%s", c.args, code, c.wantCode, errs)
			continue
		}
		e := readEnvelope(t, out, nil)
		if e.Command != c.name || e.OK != (code == 0) || e.Tool.Name != "trajvault" {
			t.Errorf("%v: command %q ok %v (exit %d)", c.args, e.Command, e.OK, code)
		}
		if c.wantCode == 1 && len(e.Findings) == 0 {
			t.Errorf("%v: exit 1 without findings", c.args)
		}
	}
	// The same run twice prints the same bytes (deterministic order).
	args := []string{"scan", "--json", "--unit", "position=angstrom", repo("testdata", "ensembles", "problems")}
	_, first, _ := runCLI(args...)
	_, second, _ := runCLI(args...)
	if first != second {
		t.Error("scan --json differs between two runs of the same input")
	}
}
