package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"trajvault/internal/testenv"
)

// TestSlurmConvert runs a conversion as a job array on a real single-node
// SLURM (Debian 12's slurmctld/slurmd/munge, started under a temporary
// folder): the gather job completes, and every trajectory file has the
// same data as a local convert (h5diff, Debian's hdf5-tools). Running the
// array again converts nothing (every trajectory skipped by checksum).
func TestSlurmConvert(t *testing.T) {
	if testing.Short() {
		t.Skip("starts SLURM daemons")
	}
	testenv.Slurm(t)
	dir := t.TempDir()
	os.Chmod(dir, 0o755)
	logs := filepath.Join(dir, "logs")
	if code, _, errs := runCLI("demo", "--text", "--trajectories", "4", "--steps", "200", logs); code != 0 {
		t.Fatalf("demo: %s", errs)
	}
	recipe := repo("testdata", "recipes", "tarnol.yaml")
	local, out := filepath.Join(dir, "local"), filepath.Join(dir, "out")
	if code, o, errs := runCLI("convert", "-j", "1", "--recipe", recipe, logs, "-o", local); code != 0 {
		t.Fatalf("local convert: exit %d %s %s", code, o, errs)
	}
	submit := func() string {
		code, o, errs := runCLI("slurm", "convert", "--shards", "3", "--submit", "--recipe", recipe, logs, "-o", out)
		m := regexp.MustCompile(`gather job (\d+)`).FindStringSubmatch(o)
		if code != 0 || m == nil {
			t.Fatalf("slurm convert: exit %d\n%s%s", code, o, errs)
		}
		return m[1]
	}
	if state := testenv.WaitSlurmJob(t, submit(), 3*time.Minute); state != "COMPLETED" {
		logsOf(t, out+".slurm")
		t.Fatalf("gather job: %s", state)
	}
	for _, n := range []string{"traj-001.h5", "traj-002.h5", "traj-003.h5", "traj-004.h5"} {
		testenv.H5DiffData(t, filepath.Join(local, n), filepath.Join(out, n))
	}
	if state := testenv.WaitSlurmJob(t, submit(), 3*time.Minute); state != "COMPLETED" {
		t.Fatalf("second gather job: %s", state)
	}
	logs2, _ := filepath.Glob(filepath.Join(out+".slurm", "convert-*.log"))
	again := 0
	for _, l := range logs2 {
		b, _ := os.ReadFile(l)
		if strings.Contains(string(b), "0 trajectories converted") {
			again++
		}
	}
	if again != 3 {
		logsOf(t, out+".slurm")
		t.Errorf("second array: %d of 3 task logs say nothing was converted again", again)
	}
}

func logsOf(t *testing.T, dir string) {
	ls, _ := filepath.Glob(filepath.Join(dir, "*.log"))
	for _, l := range ls {
		b, _ := os.ReadFile(l)
		t.Logf("%s:\n%s", filepath.Base(l), b)
	}
}

// TestSlurmPack runs a pack as a job array and a gather job on a real
// single-node SLURM: the bundle's payload is the same, byte for byte
// (equal sha256 and sha512 manifests, each checked by sha256sum), as a
// local pack of the same logs with the same SOURCE_DATE_EPOCH
// (reproducible-builds.org specification; sbatch passes the submitting
// environment to the jobs by default). The scheduler's own tool
// (scontrol; squeue shows the same while the jobs wait or run) lists the
// array's three tasks as completed.
func TestSlurmPack(t *testing.T) {
	if testing.Short() {
		t.Skip("starts SLURM daemons")
	}
	testenv.Slurm(t)
	dir, deposit := packFixture(t, "4", "200")
	os.Chmod(dir, 0o755)
	t.Setenv("SOURCE_DATE_EPOCH", "1700000000")
	logs, recipe := filepath.Join(dir, "logs"), repo("testdata", "recipes", "tarnol.yaml")
	local, out := filepath.Join(dir, "local"), filepath.Join(dir, "bag")
	if code, o, errs := runCLI("pack", "-j", "1", logs, "-o", local, "--deposit", deposit, "--recipe", recipe); code != 0 {
		t.Fatalf("local pack: exit %d\n%s%s", code, o, errs)
	}
	code, o, errs := runCLI("slurm", "pack", "--shards", "3", "--submit", "--deposit", deposit, "--recipe", recipe, logs, "-o", out)
	m := regexp.MustCompile(`submitted job array (\d+) \(3 tasks\) and gather job (\d+)`).FindStringSubmatch(o)
	if code != 0 || m == nil {
		t.Fatalf("slurm pack: exit %d\n%s%s", code, o, errs)
	}
	if state := testenv.WaitSlurmJob(t, m[2], 3*time.Minute); state != "COMPLETED" {
		logsOf(t, out+".slurm")
		t.Fatalf("gather job: %s", state)
	}
	logs3, _ := filepath.Glob(filepath.Join(out+".slurm", "pack-"+m[1]+"_*.log"))
	if len(logs3) != 3 {
		logsOf(t, out+".slurm")
		t.Errorf("%d task logs of array %s, want 3", len(logs3), m[1])
	}
	show, err := exec.Command("scontrol", "show", "job", "-o", m[1]).CombinedOutput()
	if n := strings.Count(string(show), "JobState=COMPLETED"); err != nil || n != 3 || strings.Count(string(show), "ArrayTaskId=") != 3 {
		t.Errorf("scontrol show job %s: %v, want 3 completed array tasks:\n%s", m[1], err, show)
	}
	samePayload(t, local, out)
	if code, o, e := runCLI("validate", out); code != 0 {
		t.Errorf("validate: exit %d\n%s%s", code, o, e)
	}
}

// TestSlurmPackScripts: without --submit, slurm pack writes an array of
// N tasks, each packing its shard with the user's flags and one job, and
// a gather job with the same flags (no SLURM needed); a deposit that
// cannot be loaded is a usage error before anything is written.
func TestSlurmPackScripts(t *testing.T) {
	dir, deposit := packFixture(t, "1", "10")
	out := filepath.Join(dir, "bag")
	code, o, e := runCLI("slurm", "pack", "--shards", "3", "--deposit", deposit, "--no-audit", "--sbatch=--time=00:10:00", filepath.Join(dir, "logs"), "-o", out)
	if code != 0 {
		t.Fatalf("slurm pack: exit %d\n%s%s", code, o, e)
	}
	array, err1 := os.ReadFile(filepath.Join(out+".slurm", "pack-array.sbatch"))
	gather, err2 := os.ReadFile(filepath.Join(out+".slurm", "gather.sbatch"))
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	flags := "'--deposit=" + deposit + "' '--no-audit=true' -o '" + out + "' '" + filepath.Join(dir, "logs") + "'"
	for _, want := range []string{"#SBATCH --array=0-2\n", "#SBATCH --time=00:10:00\n", `pack --shard "$SLURM_ARRAY_TASK_ID/3" --jobs 1 ` + flags + "\n"} {
		if !strings.Contains(string(array), want) {
			t.Errorf("pack-array.sbatch lacks %q:\n%s", want, array)
		}
	}
	if want := " pack --gather " + flags + "\n"; !strings.Contains(string(gather), want) {
		t.Errorf("gather.sbatch lacks %q:\n%s", want, gather)
	}
	if code, _, e := runCLI("slurm", "pack", "--shards", "3", "--deposit", filepath.Join(dir, "none.yaml"), filepath.Join(dir, "logs"), "-o", out+"2"); code != 2 || !strings.Contains(e, "none.yaml") {
		t.Errorf("missing deposit: exit %d, want 2 naming the file: %s", code, e)
	}
	if _, err := os.Stat(out + "2.slurm"); err == nil {
		t.Error("a refused slurm pack wrote scripts")
	}
}
