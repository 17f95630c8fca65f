package main

import (
	"encoding/json"
	"fmt"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"trajvault/internal/testenv"
)

func packFixture(t *testing.T, trajectories, steps string) (dir, deposit string) {
	t.Helper()
	dir = t.TempDir()
	deposit = filepath.Join(dir, "deposit.yaml")
	code, out, errs := runCLI("init", "-o", deposit, "--title", "Invented tarnol ensemble",
		"--description", "Invented demo data: surface hopping of a model triatomic.",
		"--creator", "Doe, Jane|0000-0002-1825-0097|Tarn Valley University (fictional)", "--program", "tarnol-md|1.0",
		"--contact", "Jane Doe|jane.doe@example.org")
	if code != 0 {
		t.Fatalf("init: %s %s", out, errs)
	}
	if code, _, errs := runCLI("demo", "--text", "--trajectories", trajectories, "--steps", steps, filepath.Join(dir, "logs")); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	return dir, deposit
}

// TestPackBundle: pack writes a bag that validates, in a folder and as a
// tar.zst; its RO-Crate has the RO-Crate 1.1 required properties and
// every File entity exists, is in hasPart and has the manifest's sha256;
// datacite.json has every mandatory DataCite 4.5 property. A flipped byte
// in a trajectory file is found (exit 1, the file's path).
func TestPackBundle(t *testing.T) {
	dir, deposit := packFixture(t, "2", "400")
	bag := filepath.Join(dir, "bag")
	code, out, errs := runCLI("pack", filepath.Join(dir, "logs"), "-o", bag, "--deposit", deposit,
		"--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--archive", "tar.zst", "--keep-sources")
	if code != 0 {
		t.Fatalf("pack: exit %d\n%s%s", code, out, errs)
	}
	for _, p := range []string{bag, bag + ".tar.zst"} {
		if code, out, _ := runCLI("validate", p); code != 0 || !strings.Contains(out, "ok, 0 errors, 0 warnings") {
			t.Errorf("validate %s: exit %d\n%s", p, code, out)
		}
	}
	// RO-Crate 1.1, checked here from the specification's requirements.
	raw, _ := os.ReadFile(filepath.Join(bag, "data", "ro-crate-metadata.json"))
	var crate struct {
		Context string           `json:"@context"`
		Graph   []map[string]any `json:"@graph"`
	}
	if err := json.Unmarshal(raw, &crate); err != nil || crate.Context != "https://w3id.org/ro/crate/1.1/context" {
		t.Fatalf("crate context: %v %q", err, crate.Context)
	}
	ids := map[string]map[string]any{}
	for _, e := range crate.Graph {
		ids[e["@id"].(string)] = e
	}
	root := ids["./"]
	for _, k := range []string{"name", "description", "datePublished", "license", "hasPart"} {
		if root[k] == nil {
			t.Errorf("root lacks %s", k)
		}
	}
	sums := map[string]string{}
	man, _ := os.ReadFile(filepath.Join(bag, "manifest-sha256.txt"))
	for _, l := range strings.Split(strings.TrimSpace(string(man)), "\n") {
		f := strings.SplitN(l, " ", 2)
		sums[f[1]] = f[0]
	}
	parts := map[string]bool{}
	for _, p := range root["hasPart"].([]any) {
		parts[p.(map[string]any)["@id"].(string)] = true
	}
	files := 0
	for id, e := range ids {
		if e["@type"] != "File" || strings.HasPrefix(id, "#") {
			continue
		}
		files++
		if _, err := os.Stat(filepath.Join(bag, "data", id)); err != nil || !parts[id] || e["sha256"] != sums["data/"+id] {
			t.Errorf("File %s: exists %v, in hasPart %v, sha256 matches %v", id, err == nil, parts[id], e["sha256"] == sums["data/"+id])
		}
	}
	if files < 5 {
		t.Errorf("only %d File entities", files)
	}
	// DataCite 4.5 mandatory properties.
	raw, _ = os.ReadFile(filepath.Join(bag, "data", "datacite.json"))
	var dc map[string]any
	json.Unmarshal(raw, &dc)
	for _, k := range []string{"identifier", "creators", "titles", "publisher", "publicationYear", "types"} {
		if dc[k] == nil {
			t.Errorf("datacite.json lacks %s", k)
		}
	}
	if dc["types"].(map[string]any)["resourceTypeGeneral"] != "Dataset" {
		t.Error("resourceTypeGeneral is not Dataset")
	}
	// Tamper: one flipped byte in a trajectory file.
	h5 := filepath.Join(bag, "data", "trajectories", "traj-001.h5")
	b, _ := os.ReadFile(h5)
	b[len(b)/2] ^= 0x40
	os.WriteFile(h5, b, 0o644)
	code, out, _ = runCLI("validate", bag)
	if code != 1 || !strings.Contains(out, "B7   data/trajectories/traj-001.h5") {
		t.Errorf("tampered bag: exit %d\n%s", code, out)
	}
	// Never overwritten without --force.
	if code, _, errs = runCLI("pack", filepath.Join(dir, "logs"), "-o", bag, "--deposit", deposit, "--recipe", repo("testdata", "recipes", "tarnol.yaml")); code != 2 || !strings.Contains(errs, "--force") {
		t.Errorf("pack over an existing bundle: exit %d %s", code, errs)
	}
}

// TestPackKilledLeavesNoBundle: a pack killed midway (SIGKILL) leaves no
// bundle folder, and a rerun succeeds.
func TestPackKilledLeavesNoBundle(t *testing.T) {
	dir, deposit := packFixture(t, "8", "8000")
	bag := filepath.Join(dir, "bag")
	args := []string{"pack", filepath.Join(dir, "logs"), "-o", bag, "--deposit", deposit, "--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--jobs", "1"}
	cmd := exec.Command(os.Args[0], args...)
	cmd.Env = append(os.Environ(), "TRAJVAULT_AS_MAIN=1")
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Kill once the partial bundle exists, i.e. while converting.
	deadline := time.Now().Add(20 * time.Second)
	for time.Now().Before(deadline) {
		if m, _ := filepath.Glob(filepath.Join(dir, ".bag.partial-*")); len(m) > 0 {
			break
		}
		time.Sleep(5 * time.Millisecond)
	}
	time.Sleep(100 * time.Millisecond)
	cmd.Process.Signal(syscall.SIGKILL)
	err := cmd.Wait()
	if err == nil {
		t.Skip("pack finished before it could be killed; nothing to test")
	}
	if _, err := os.Stat(bag); !os.IsNotExist(err) {
		t.Fatalf("a killed pack left %s", bag)
	}
	if code, out, errs := runCLI(args...); code != 0 {
		t.Fatalf("rerun: exit %d\n%s%s", code, out, errs)
	}
	if code, out, _ := runCLI("validate", bag); code != 0 {
		t.Errorf("rerun bundle: %s", out)
	}
}

// TestPackSplit: with --split, limits that one bag would exceed give
// several bags of one group, each valid, each naming its place, each
// within the file limit (9 metadata files + 2 per trajectory: one
// trajectory per bag at 12).
func TestPackSplit(t *testing.T) {
	dir, deposit := packFixture(t, "3", "200")
	out := filepath.Join(dir, "b")
	code, o, errs := runCLI("pack", filepath.Join(dir, "logs"), "-o", out, "--deposit", deposit,
		"--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--max-files", "12", "--split", "--no-audit")
	if code != 0 {
		t.Fatalf("exit %d %s %s", code, o, errs)
	}
	for i := 1; i <= 3; i++ {
		bag := out + "-" + string(rune('0'+i))
		info, _ := os.ReadFile(filepath.Join(bag, "bag-info.txt"))
		if !strings.Contains(string(info), "Bag-Count: "+string(rune('0'+i))+" of 3") || !strings.Contains(string(info), "Bag-Group-Identifier: b") {
			t.Errorf("%s bag-info:\n%s", bag, info)
		}
		if code, o, _ := runCLI("validate", bag); code != 0 {
			t.Errorf("%s: %s", bag, o)
		}
		files := 0
		filepath.Walk(bag, func(_ string, fi os.FileInfo, err error) error {
			if err == nil && fi.Mode().IsRegular() {
				files++
			}
			return nil
		})
		if files > 12 {
			t.Errorf("%s holds %d files, over the limit of 12", bag, files)
		}
	}
}

// TestPackRequireAudit: a planted fault (populations that do not sum to
// one) fails the audit; pack says so on stderr and, with
// --require-audit ok, exits 1 and writes nothing (issue 15).
func TestPackRequireAudit(t *testing.T) {
	dir, deposit := packFixture(t, "2", "200")
	logs := filepath.Join(dir, "bad")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "2", "--steps", "200", "--amplitude-scale", "1.2", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	out := filepath.Join(dir, "b")
	code, _, errs := runCLI("pack", logs, "-o", out, "--deposit", deposit,
		"--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--require-audit", "ok")
	if code != exitFindings || !strings.Contains(errs, "audit verdict fail") {
		t.Fatalf("exit %d, want 1 with the verdict on stderr:\n%s", code, errs)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 3 {
		t.Errorf("pack left files behind: %v", entries)
	}
}

// TestDataDescriptionCodeRuns: the Python snippets of a bundle's data
// description run as written with Debian's python3-h5py in the bundle's
// data folder, and the time axis they rebuild has one entry per frame,
// starting at 0 and increasing.
func TestDataDescriptionCodeRuns(t *testing.T) {
	dir, deposit := packFixture(t, "1", "300")
	bag := filepath.Join(dir, "bag")
	if code, _, errs := runCLI("pack", filepath.Join(dir, "logs"), "-o", bag, "--deposit", deposit,
		"--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--no-audit"); code != 0 {
		t.Fatalf("pack: %s", errs)
	}
	desc, err := os.ReadFile(filepath.Join(bag, "data", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	var code []string
	for _, block := range strings.Split(string(desc), "```python\n")[1:] {
		code = append(code, strings.SplitN(block, "```", 2)[0])
	}
	if len(code) < 2 {
		t.Fatalf("expected the reading and the time-axis snippets, found %d", len(code))
	}
	code = append(code, `print(len(time), x.shape[0], repr(float(time[0])), repr(float(time[-1])))`)
	cmd := exec.Command(testenv.Python(), "-c", strings.Join(code, "\n"))
	cmd.Dir = filepath.Join(bag, "data")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("the data description's Python does not run: %v\n%s\n%s", err, strings.Join(code, "\n"), out)
	}
	var n, frames int
	var t0, t1 float64
	if _, err := fmt.Sscan(string(out), &n, &frames, &t0, &t1); err != nil {
		t.Fatalf("output %q: %v", out, err)
	}
	if n != frames || frames != 301 || t0 != 0 || t1 <= t0 {
		t.Errorf("time axis of %d entries for %d frames (want 301), from %g to %g", n, frames, t0, t1)
	}
}

// TestPackForceKilled (issue 12, item 6: a pack --force killed while
// replacing a bundle left it half-deleted, 10 of 10 trials): pack --force
// over a valid bundle is killed (SIGKILL) at 20 random points of its run;
// after each kill the bundle validates (exit 0), i.e. it is the complete
// old or the complete new one. A folder named like the old staging folder
// (bag.partial), which the user owns, survives every run. Seeded.
func TestPackForceKilled(t *testing.T) {
	dir, deposit := packFixture(t, "2", "300")
	bag := filepath.Join(dir, "bag")
	args := []string{"pack", filepath.Join(dir, "logs"), "-o", bag, "--deposit", deposit, "--recipe", repo("testdata", "recipes", "tarnol.yaml"), "--jobs", "1", "--force"}
	mine := filepath.Join(dir, "bag.partial")
	os.MkdirAll(mine, 0o755)
	os.WriteFile(filepath.Join(mine, "notes.txt"), []byte("the user's own"), 0o644)
	sub := func() *exec.Cmd {
		cmd := exec.Command(os.Args[0], args...)
		cmd.Env = append(os.Environ(), "TRAJVAULT_AS_MAIN=1")
		return cmd
	}
	if out, err := sub().CombinedOutput(); err != nil {
		t.Fatalf("first pack: %v\n%s", err, out)
	}
	// A second, replacing run gives the time of a whole run as a process.
	start := time.Now()
	if out, err := sub().CombinedOutput(); err != nil {
		t.Fatalf("pack --force: %v\n%s", err, out)
	}
	full := time.Since(start)
	trials := 20 // the 20 random points of issue 12
	if testing.Short() {
		trials = 4
	}
	rng := rand.New(rand.NewSource(6))
	killed := 0
	for i := 0; i < trials; i++ {
		// A point anywhere in the run, the final swap included.
		at := time.Duration(rng.Int63n(int64(full) + int64(full)/10))
		cmd := sub()
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		time.Sleep(at)
		cmd.Process.Signal(syscall.SIGKILL)
		if cmd.Wait() != nil {
			killed++
		}
		if code, out, errs := runCLI("validate", bag); code != 0 {
			t.Fatalf("trial %d, killed after %v: bundle does not validate (exit %d)\n%s%s", i, at, code, out, errs)
		}
	}
	if b, err := os.ReadFile(filepath.Join(mine, "notes.txt")); err != nil || string(b) != "the user's own" {
		t.Errorf("the user's bag.partial was touched: %v", err)
	}
	t.Logf("%d trials, %d killed mid-run (a full pack takes %v); the bundle validated after each", trials, killed, full.Round(time.Millisecond))
	if killed == 0 {
		t.Error("no run was killed: the test tested nothing")
	}
}
