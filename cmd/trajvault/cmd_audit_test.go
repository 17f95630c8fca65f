package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/trajfile"
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
	// JSON is the envelope, its result follows schema/audit.schema.json.
	code, out, _ = runCLI("audit", "--json", good, bad)
	if env := readEnvelope(t, out, nil); code != 1 || env.OK || len(env.Findings) == 0 {
		t.Errorf("audit --json: exit %d, ok %v, %d findings", code, env.OK, len(env.Findings))
	}
	// A file that cannot be audited is an error finding (exit 1); the
	// other files are audited and the JSON still follows the schema.
	junk := filepath.Join(t.TempDir(), "junk.h5")
	if err := os.WriteFile(junk, []byte("not HDF5\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs = runCLI("audit", good, junk)
	if code != 1 || !strings.Contains(out, "  error   A10  junk.h5: cannot audit") || !strings.Contains(out, " good.h5 (601 frames") {
		t.Errorf("unreadable file: exit %d\n%s%s", code, out, errs)
	}
	code, out, _ = runCLI("audit", "--json", good, junk)
	if env := readEnvelope(t, out, nil); code != 1 || env.OK {
		t.Errorf("audit --json with an unreadable file: exit %d, ok %v", code, env.OK)
	}
	// The report appears whole, and is never overwritten.
	rep := filepath.Join(dir, "audit.html")
	if code, _, errs = runCLI("audit", "--no-fail", "--report", rep, dir); code != 0 {
		t.Fatalf("report: exit %d %s", code, errs)
	}
	if st, err := os.Stat(rep); err != nil || st.Size() < 10000 {
		t.Errorf("report missing or small: %v", err)
	}
	// The energy plot names the flagged run and shows the thresholds,
	// the version and the date (issue 15).
	html, _ := os.ReadFile(rep)
	for _, want := range []string{">bad.h5</text>", ">1 not flagged</text>", ">warn +-0.1 eV</text>", "2 trajectories, 1 flagged; warn above 0.1 eV, fail above 0.5 eV; trajvault "} {
		if !strings.Contains(string(html), want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if code, _, errs = runCLI("audit", "--report", rep, dir); code != 2 || !strings.Contains(errs, "already exists") {
		t.Errorf("second report: exit %d %s", code, errs)
	}
}

// TestAuditNotRunNeverOK: a file with positions and energies only (no
// velocities, forces or electronic states) cannot run most checks; the
// text output never shows "ok" for them (issue 13: "ok flagged:
// force-noise: 0 of 8 fail" and "ok run001.h5" when nothing ran), and
// the JSON gives "n/a" for each.
func TestAuditNotRunNeverOK(t *testing.T) {
	p := filepath.Join(t.TempDir(), "bare.h5")
	w, err := trajfile.Create(p, trajfile.Spec{Species: []int{8, 1, 1}, Masses: []float64{15.999, 1.008, 1.008}, Potential: true, Total: true,
		Units: trajfile.Units{Length: "bohr", Time: "fs", Energy: "hartree", Mass: "u"}, TimeStep: 0.5})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 50; i++ {
		x := 0.01 * float64(i%7)
		fr := trajfile.Frame{Step: int64(i), Time: 0.5 * float64(i), Position: []float64{0, 0, 0, 1.8 + x, 0, 0, -0.5, 1.7, 0}, Potential: -1, Total: -1}
		if err := w.WriteFrame(&fr); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	_, out, errs := runCLI("audit", p)
	notRun := []string{"time-step", "force-noise", "populations", "hop-probability", "hops", "momentum", "zpe-leakage", "internal-consistency"}
	for _, l := range strings.Split(out, "\n") {
		f := strings.Fields(l)
		if len(f) < 2 || f[0] != "ok" {
			continue
		}
		for _, name := range notRun {
			if strings.Contains(l, " "+name+":") {
				t.Errorf("a check that did not run shows ok: %q", l)
			}
		}
		if strings.Contains(l, "bare.h5") && !strings.Contains(l, "checks not run") {
			t.Errorf("trajectory line shows ok without saying what did not run: %q", l)
		}
	}
	for _, name := range notRun {
		label := "flagged: " + name + ":"
		if name == "internal-consistency" {
			label = name + ":"
		}
		if !strings.Contains(out, "  not run "+label) {
			t.Errorf("text does not say %s did not run:\n%s%s", name, out, errs)
		}
	}
	if !strings.Contains(out, "for the checks that ran") {
		t.Errorf("the verdict line does not say it covers only the checks that ran:\n%s", out)
	}
	_, out, _ = runCLI("audit", "--json", p)
	var doc struct {
		Trajectories []struct {
			Checks []struct{ Check, Verdict string }
		}
		Ensemble []struct{ Check, Verdict string }
	}
	readEnvelope(t, out, &doc)
	for _, c := range append(doc.Trajectories[0].Checks, doc.Ensemble...) {
		name := strings.TrimPrefix(c.Check, "flagged: ")
		for _, n := range notRun {
			if name == n && c.Verdict != "n/a" {
				t.Errorf("JSON: %s is %q, want n/a", c.Check, c.Verdict)
			}
		}
	}
}

// TestAuditBoundShownAsBound: force noise the data cannot resolve (1e-6
// hartree/bohr on a hop-rich run at 0.2 fs steps, where the noise-free
// run is bounded only at some 2e-6; see audit.TestForceNoiseBelowFloor)
// is an upper bound everywhere: JSON carries it in upper_bounds and
// never as a value, the finding and the HTML report say "an upper bound
// and not a value", and no output prints "sigma_F =".
func TestAuditBoundShownAsBound(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "quiet.h5")
	o := demo.DefaultOptions
	o.Seed, o.Steps, o.DtFs = 2, 10000, 0.2
	o.Faults = demo.Faults{CouplingScale: 0.3, ForceNoise: 1e-6}
	if err := demo.WriteH5(p, o); err != nil {
		t.Fatal(err)
	}
	_, out, errs := runCLI("audit", "--json", "--no-fail", p)
	var doc struct {
		Trajectories []struct {
			Checks []struct {
				Check, Summary string
				Values         map[string]*float64
				Bounds         map[string]*float64 `json:"upper_bounds"`
			}
		}
	}
	readEnvelope(t, out, &doc)
	found := false
	for _, c := range doc.Trajectories[0].Checks {
		if c.Check != "force-noise" {
			continue
		}
		found = true
		if b := c.Bounds["sigma_F_hartree_per_bohr"]; b == nil || *b < 1e-6 {
			t.Errorf("JSON upper_bounds lacks sigma_F at or above 1e-6: %v", c.Bounds)
		}
		if _, ok := c.Values["sigma_F_hartree_per_bohr"]; ok {
			t.Errorf("JSON gives sigma_F as a value as well: %v", c.Values)
		}
		if !strings.Contains(c.Summary, "an upper bound and not a value") {
			t.Errorf("summary does not say it is a bound: %s", c.Summary)
		}
	}
	if !found {
		t.Fatalf("no force-noise check in\n%s%s", out, errs)
	}
	if !strings.Contains(out, "force-noise: pass: sigma_F below") {
		t.Errorf("no finding states the bound:\n%s", out)
	}
	rep := filepath.Join(dir, "r.html")
	if code, txt, errs := runCLI("audit", "--no-fail", "--report", rep, p); code != 0 || strings.Contains(txt, "sigma_F =") {
		t.Fatalf("report: exit %d %s%s", code, txt, errs)
	}
	b, err := os.ReadFile(rep)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), "an upper bound and not a value") || strings.Contains(string(b), "sigma_F =") {
		t.Errorf("HTML report does not show the force noise as a bound")
	}
}
