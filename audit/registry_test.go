package audit

import (
	"context"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/finding"
	"trajvault/internal/trajfile"
)

// schemaEnums reads the check names and codes that
// schema/audit.schema.json (JSON Schema 2020-12) allows.
func schemaEnums(t *testing.T) (names, codes []string) {
	t.Helper()
	raw, err := os.ReadFile(filepath.Join("..", "schema", "audit.schema.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Defs struct {
			Code  struct{ Enum []string } `json:"code"`
			Check struct {
				Properties struct {
					Check struct{ Enum []string } `json:"check"`
				} `json:"properties"`
			} `json:"check"`
		} `json:"$defs"`
	}
	if err := json.Unmarshal(raw, &doc); err != nil {
		t.Fatal(err)
	}
	return doc.Defs.Check.Properties.Check.Enum, doc.Defs.Code.Enum
}

// TestRegistryMatchesSchema: every registered check (and its ensemble
// count line) is a name the schema allows, every name the schema allows
// is a registered check, and likewise for the codes.
func TestRegistryMatchesSchema(t *testing.T) {
	names, codes := schemaEnums(t)
	var wantNames, wantCodes []string
	for _, c := range Registry() {
		wantNames = append(wantNames, c.Name)
		if c.Scope == PerFile {
			wantNames = append(wantNames, FlaggedPrefix+c.Name)
		}
		wantCodes = append(wantCodes, c.Code)
	}
	wantCodes = append(wantCodes, FileUnreadable)
	// The command reads each file first in a worker process; a worker
	// that crashed, ran out of time or of memory is X1-X3 (the codes of
	// validate.Isolated), not a check of this package.
	wantCodes = append(wantCodes, "X1", "X2", "X3")
	for _, set := range []struct {
		what        string
		schema, reg []string
	}{{"check name", names, wantNames}, {"code", codes, wantCodes}} {
		for _, n := range set.reg {
			if !slices.Contains(set.schema, n) {
				t.Errorf("%s %q is registered but missing from schema/audit.schema.json", set.what, n)
			}
		}
		for _, n := range set.schema {
			if !slices.Contains(set.reg, n) {
				t.Errorf("%s %q is in schema/audit.schema.json but no check has it", set.what, n)
			}
		}
	}
}

// TestRegistryRules: the registry itself passes verifyRegistry, and each
// way of breaking it is caught.
func TestRegistryRules(t *testing.T) {
	if err := verifyRegistry(checks); err != nil {
		t.Fatal(err)
	}
	run := func(*auditor, *derived) (Check, string) { return Check{}, "" }
	ok := func(name, code string) Spec {
		return Spec{Name: name, Code: code, Quantity: "q", Doc: "d", Rule: func(Settings) string { return "r" }, file: run}
	}
	giver := ok("giver", "X1")
	giver.Gives = []Value{FastestPeriod}
	needer := ok("needer", "X2")
	needer.Needs = []Value{FastestPeriod}
	noRunner := ok("ensemble", "X3")
	noRunner.Scope = PerEnsemble
	noDoc := ok("nodoc", "X4")
	noDoc.Doc = ""
	tests := []struct {
		name    string
		reg     []Spec
		wantErr string
	}{
		{"giver before needer", []Spec{giver, needer}, ""},
		{"needer before giver", []Spec{needer, giver}, "needs fastest-period"},
		{"duplicate name", []Spec{ok("a", "X1"), ok("a", "X2")}, "registered twice"},
		{"duplicate code", []Spec{ok("a", "X1"), ok("b", "X1")}, "used twice"},
		{"code of unreadable files", []Spec{ok("a", FileUnreadable)}, "used twice"},
		{"no runner for scope", []Spec{noRunner}, "no runner"},
		{"no doc", []Spec{noDoc}, "needs Doc"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := verifyRegistry(tc.reg)
			if tc.wantErr == "" && err != nil || tc.wantErr != "" && (err == nil || !strings.Contains(err.Error(), tc.wantErr)) {
				t.Errorf("got %v, want error containing %q", err, tc.wantErr)
			}
		})
	}
	for _, c := range Registry() {
		if r := c.Rule(DefaultSettings); r == "" {
			t.Errorf("%s: empty rule", c.Name)
		}
	}
}

// TestEveryCheckRunsAndIsSummarised: on the demo model (which stores
// every quantity the checks read), every registered per-file check gives
// a verdict for every file, appears in the ensemble summary, and becomes
// one finding with its code, quantity and an HDF5 path of the layout.
func TestEveryCheckRunsAndIsSummarised(t *testing.T) {
	paths := []string{demoRun(t, 61, 400, demo.Faults{}), demoRun(t, 62, 400, demo.Faults{})}
	rep, err := Ensemble(context.Background(), paths, DefaultSettings, 2, nil)
	if err != nil {
		t.Fatal(err)
	}
	perFile := 0
	for _, spec := range Registry() {
		if spec.Scope == PerEnsemble {
			if !slices.ContainsFunc(rep.Ensemble, func(c Check) bool { return c.Name == spec.Name && c.Code == spec.Code }) {
				t.Errorf("ensemble check %s missing from the report", spec.Name)
			}
			continue
		}
		perFile++
		for _, r := range rep.Trajectories {
			if !slices.ContainsFunc(r.Checks, func(c Check) bool { return c.Name == spec.Name && c.Code == spec.Code }) {
				t.Errorf("%s: check %s did not run", r.File, spec.Name)
			}
		}
		if !slices.ContainsFunc(rep.Ensemble, func(c Check) bool { return c.Name == FlaggedPrefix+spec.Name }) {
			t.Errorf("check %s missing from the ensemble summary", spec.Name)
		}
	}
	if want := perFile*len(paths) + len(Registry()) - perFile; len(rep.Findings) != want {
		t.Errorf("%d findings, want %d", len(rep.Findings), want)
	}
	for _, f := range rep.Findings {
		spec, ok := Lookup(strings.SplitN(f.Message, ":", 2)[0])
		if !ok || spec.Code != f.Code || spec.Quantity != f.Quantity {
			t.Errorf("finding %v does not match its check %+v", f, spec)
		}
		if !strings.HasPrefix(f.Path, trajfile.ObservablesGroup) && !strings.HasPrefix(f.Path, trajfile.ParticlesGroup) && !strings.HasPrefix(f.Path, trajfile.ElectronicGroup) {
			t.Errorf("finding %v: path outside the layout", f)
		}
	}
}

// TestVerdictSeverity: fail is an error, warn a warning, the rest notes
// that say why.
func TestVerdictSeverity(t *testing.T) {
	tests := []struct {
		v      Verdict
		want   finding.Severity
		prefix string
	}{
		{Fail, finding.Error, "energy: drift"},
		{Warn, finding.Warning, "energy: drift"},
		{OK, finding.Note, "energy: pass: drift"},
		{Unknown, finding.Note, "energy: cannot tell: drift"},
		{NA, finding.Note, "energy: not run: drift"},
	}
	for _, tc := range tests {
		f := checkFinding("f.h5", Check{Name: "energy", Code: "A1", Verdict: tc.v, Summary: "drift", path: trajfile.TotalEnergy})
		want := finding.Finding{Code: "A1", Severity: tc.want, Location: finding.Location{File: "f.h5", Path: trajfile.TotalEnergy},
			Quantity: "total_energy", Message: tc.prefix}
		if f != want {
			t.Errorf("%s: got %+v, want %+v", tc.v, f, want)
		}
	}
}

// TestBadFileIsAFinding: a file that is not HDF5 and a missing file each
// become one error finding; the good file is audited all the same.
func TestBadFileIsAFinding(t *testing.T) {
	good := demoRun(t, 63, 300, demo.Faults{})
	junk := filepath.Join(t.TempDir(), "junk.h5")
	if err := os.WriteFile(junk, []byte("not an HDF5 file\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	missing := filepath.Join(t.TempDir(), "missing.h5")
	rep, err := Ensemble(context.Background(), []string{junk, good, missing}, DefaultSettings, 3, nil)
	if err != nil {
		t.Fatalf("one bad file stopped the ensemble: %v", err)
	}
	var bad []string
	for _, f := range rep.Findings {
		if f.Code == FileUnreadable {
			if f.Severity != finding.Error {
				t.Errorf("%v: want an error", f)
			}
			bad = append(bad, f.File)
		}
	}
	if !slices.Equal(bad, []string{junk, missing}) {
		t.Errorf("unreadable files reported: %v, want %v", bad, []string{junk, missing})
	}
	if r := rep.Trajectories[1]; r.Error != "" || len(r.Checks) == 0 {
		t.Errorf("good file not audited: %+v", r)
	}
	if rep.Trajectories[0].Verdict != Fail || rep.Flagged < 2 {
		t.Errorf("bad files not flagged: verdict %s, %d flagged", rep.Trajectories[0].Verdict, rep.Flagged)
	}
}

// TestEnsembleCancelled: a cancelled context stops the ensemble with the
// context's error, not with findings.
func TestEnsembleCancelled(t *testing.T) {
	p := demoRun(t, 64, 300, demo.Faults{})
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	rep, err := Ensemble(ctx, []string{p, p, p}, DefaultSettings, 1, nil)
	if !errors.Is(err, context.Canceled) || rep != nil {
		t.Errorf("got %v, %v; want context.Canceled", rep, err)
	}
	if _, err := File(ctx, p, DefaultSettings); !errors.Is(err, context.Canceled) {
		t.Errorf("File: got %v, want context.Canceled", err)
	}
}
