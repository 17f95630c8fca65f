package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"

	"trajvault/internal/testenv"
)

// TestConvertWorkers: --jobs 2 converts an ensemble in worker processes
// into files with the same data as --jobs 1 (h5diff from Debian's
// hdf5-tools, ignoring only the provenance record, which names the
// command line); a worker killed by SIGKILL while holding one trajectory
// fails that trajectory with a clear message, the run exits 1, and
// nothing appears under the output name nor beside it.
func TestConvertWorkers(t *testing.T) {
	dir := t.TempDir()
	logs := filepath.Join(dir, "logs")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "3", "--steps", "300", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	recipe := repo("testdata", "recipes", "tarnol.yaml")
	one, two := filepath.Join(dir, "one"), filepath.Join(dir, "two")
	if code, out, errs := runCLI("convert", "-j", "1", "--recipe", recipe, logs, "-o", one); code != 0 {
		t.Fatalf("jobs 1: exit %d %s %s", code, out, errs)
	}
	if code, out, errs := runCLI("convert", "-j", "2", "--recipe", recipe, logs, "-o", two); code != 0 || !strings.Contains(out, "3 trajectories, 903 frames") {
		t.Fatalf("jobs 2: exit %d %s %s", code, out, errs)
	}
	for _, n := range []string{"traj-001.h5", "traj-002.h5", "traj-003.h5"} {
		testenv.H5DiffData(t, filepath.Join(one, n), filepath.Join(two, n))
	}

	t.Setenv("TRAJVAULT_TEST_FAULT", "kill:traj-002")
	killed := filepath.Join(dir, "killed")
	code, out, errs := runCLI("convert", "-j", "2", "--recipe", recipe, logs, "-o", killed)
	if code != 1 || !strings.Contains(errs, "traj-002: the worker process ended while converting it (signal: killed)") {
		t.Errorf("killed worker: exit %d\n%s%s", code, out, errs)
	}
	if strings.Contains(errs, "traj-001:") || strings.Contains(errs, "traj-003:") {
		t.Errorf("other trajectories failed too:\n%s", errs)
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if e.Name() != "logs" && e.Name() != "one" && e.Name() != "two" {
			t.Errorf("left behind after a failed run: %s", e.Name())
		}
	}
}

// TestPackWorkers: pack with worker processes writes trajectory files
// with the same data as pack --jobs 1 (h5diff, Debian's hdf5-tools).
func TestPackWorkers(t *testing.T) {
	dir, deposit := packFixture(t, "3", "200")
	recipe := repo("testdata", "recipes", "tarnol.yaml")
	for _, j := range []string{"1", "2"} {
		if code, out, errs := runCLI("pack", "-j", j, filepath.Join(dir, "logs"), "-o", filepath.Join(dir, "bag"+j), "--deposit", deposit,
			"--recipe", recipe, "--no-audit"); code != 0 {
			t.Fatalf("pack -j %s: exit %d\n%s%s", j, code, out, errs)
		}
	}
	for _, n := range []string{"traj-001.h5", "traj-002.h5", "traj-003.h5"} {
		testenv.H5DiffData(t, filepath.Join(dir, "bag1", "data", "trajectories", n), filepath.Join(dir, "bag2", "data", "trajectories", n))
	}
}

// TestPackTakesConversionFlags: pack has convert's conversion flags (one
// flag set): a cut last frame is refused (exit 1, nothing written) and
// packed with --drop-partial, in worker processes and in this one, and
// --hdf5-compat is checked as convert checks it.
func TestPackTakesConversionFlags(t *testing.T) {
	dir, deposit := packFixture(t, "1", "100")
	logs := filepath.Join(dir, "cut")
	if code, _, errs := runCLI("demo", "--text", "--truncate-last", "--trajectories", "2", "--steps", "100", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	recipe := repo("testdata", "recipes", "tarnol.yaml")
	bag := filepath.Join(dir, "bag")
	if code, _, errs := runCLI("pack", logs, "-o", bag, "--deposit", deposit, "--recipe", recipe, "--no-audit"); code != 1 {
		t.Errorf("cut last frame without --drop-partial: exit %d, want 1\n%s", code, errs)
	}
	if _, err := os.Stat(bag); err == nil {
		t.Error("a refused pack wrote the bundle")
	}
	for _, j := range []string{"1", "2"} {
		out := bag + j
		if code, o, errs := runCLI("pack", "-j", j, logs, "-o", out, "--deposit", deposit, "--recipe", recipe, "--no-audit",
			"--drop-partial", "--author", "Roe, Richard", "--chunk-frames", "64"); code != 0 {
			t.Fatalf("pack -j %s --drop-partial: exit %d\n%s%s", j, code, o, errs)
		}
		b, err := exec.Command("h5dump", "-a", "/h5md/author/name", filepath.Join(out, "data", "trajectories", "traj-001.h5")).CombinedOutput()
		if err != nil || !strings.Contains(string(b), "Roe, Richard") {
			t.Errorf("-j %s: --author not recorded (h5dump, Debian's hdf5-tools): %v\n%s", j, err, b)
		}
	}
	if code, _, errs := runCLI("pack", logs, "-o", bag, "--deposit", deposit, "--hdf5-compat", "1.6"); code != 2 || !strings.Contains(errs, "--hdf5-compat") {
		t.Errorf("--hdf5-compat 1.6: exit %d %s", code, errs)
	}
}

// TestWorkerEnvSharesCores: N workers get GOMAXPROCS = cores / N (at
// least 1); a GOMAXPROCS the user set is passed on unchanged.
func TestWorkerEnvSharesCores(t *testing.T) {
	t.Setenv("GOMAXPROCS", "")
	os.Unsetenv("GOMAXPROCS")
	want := "GOMAXPROCS=" + strconv.Itoa(max(1, runtime.NumCPU()/2))
	if env := workerEnv(2); env[len(env)-1] != want {
		t.Errorf("workerEnv(2) ends with %q, want %q", env[len(env)-1], want)
	}
	if env := workerEnv(1); slices.ContainsFunc(env, func(s string) bool { return strings.HasPrefix(s, "GOMAXPROCS=") }) {
		t.Errorf("workerEnv(1) sets GOMAXPROCS: one worker may use every core")
	}
	t.Setenv("GOMAXPROCS", "3")
	n := 0
	for _, s := range workerEnv(4) {
		if strings.HasPrefix(s, "GOMAXPROCS=") {
			n++
			if s != "GOMAXPROCS=3" {
				t.Errorf("user's GOMAXPROCS replaced by %q", s)
			}
		}
	}
	if n != 1 {
		t.Errorf("%d GOMAXPROCS entries, want the user's one", n)
	}
}
