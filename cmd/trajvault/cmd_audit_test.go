package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/trajfile"
	"trajvault/schema"
)

func TestAuditCommand(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.h5")
	bad := filepath.Join(dir, "bad.h5")
	o := demo.DefaultOptions
	o.Steps = 600
	if err := demo.WriteH5(good, o); err != nil {
		t.Fatal(err)
	}
	o.Faults = demo.Faults{NoRescaleEvery: 1}
	if err := demo.WriteH5(bad, o); err != nil {
		t.Fatal(err)
	}
	code, out, errs := runCLI("audit", good)
	if code != 0 || !strings.Contains(out, "not a certificate") {
		t.Errorf("clean run: exit %d\n%s%s", code, out, errs)
	}
	for _, l := range strings.Split(out, "\n") {
		if len(l) > 80 {
			t.Errorf("line longer than 80 columns: %q", l)
		}
	}
	// A failed check prints as a finding: severity, code, place, message.
	if code, out, _ = runCLI("audit", bad); code != 1 || !strings.Contains(out, "  error   A6   bad.h5: "+trajfile.HopsGroup+": hops:") {
		t.Errorf("faulty run: exit %d\n%s", code, out)
	}
	if code, _, _ = runCLI("audit", "--no-fail", bad); code != 0 {
		t.Errorf("--no-fail: exit %d", code)
	}
	// JSON follows schema/audit.schema.json.
	code, out, _ = runCLI("audit", "--json", good, bad)
	sch, err := schema.AuditSchema()
	if err != nil {
		t.Fatal(err)
	}
	var doc any
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("exit %d, not JSON: %v", code, err)
	}
	if err := sch.Validate(doc); err != nil {
		t.Error(err)
	}
	// A file that cannot be audited is an error finding (exit 1); the
	// other files are audited and the JSON still follows the schema.
	junk := filepath.Join(t.TempDir(), "junk.h5")
	if err := os.WriteFile(junk, []byte("not HDF5\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs = runCLI("audit", good, junk)
	if code != 1 || !strings.Contains(out, "  error   A10  junk.h5: cannot audit") || !strings.Contains(out, " good.h5 (601 frames)") {
		t.Errorf("unreadable file: exit %d\n%s%s", code, out, errs)
	}
	code, out, _ = runCLI("audit", "--json", good, junk)
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("exit %d, not JSON: %v", code, err)
	}
	if err := sch.Validate(doc); err != nil {
		t.Error(err)
	}
	// The report appears whole, and is never overwritten.
	rep := filepath.Join(dir, "audit.html")
	if code, _, errs = runCLI("audit", "--no-fail", "--report", rep, dir); code != 0 {
		t.Fatalf("report: exit %d %s", code, errs)
	}
	if st, err := os.Stat(rep); err != nil || st.Size() < 10000 {
		t.Errorf("report missing or small: %v", err)
	}
	if code, _, errs = runCLI("audit", "--report", rep, dir); code != 2 || !strings.Contains(errs, "already exists") {
		t.Errorf("second report: exit %d %s", code, errs)
	}
}
