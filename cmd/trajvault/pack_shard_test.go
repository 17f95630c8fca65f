package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// samePayload fails unless bags a and b list the same payload files with
// the same checksums (their sha256 and sha512 manifests are equal), and
// each manifest holds for its bag by GNU coreutils' sha256sum -c (RFC
// 8493, section 2.1.3: "checksum filepath" lines, the format sha256sum
// reads).
func samePayload(t *testing.T, a, b string) {
	t.Helper()
	for _, m := range []string{"manifest-sha256.txt", "manifest-sha512.txt"} {
		ma, errA := os.ReadFile(filepath.Join(a, m))
		mb, errB := os.ReadFile(filepath.Join(b, m))
		if errA != nil || errB != nil {
			t.Fatalf("%s: %v %v", m, errA, errB)
		}
		if string(ma) != string(mb) {
			t.Errorf("%s differs:\n%s:\n%s\n%s:\n%s", m, a, ma, b, mb)
		}
	}
	for _, d := range []string{a, b} {
		cmd := exec.Command("sha256sum", "--check", "--quiet", "manifest-sha256.txt")
		cmd.Dir = d
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Errorf("%s: sha256sum --check: %v\n%s", d, err, out)
		}
	}
	m, _ := os.ReadFile(filepath.Join(a, "manifest-sha256.txt"))
	for _, want := range []string{"data/README.md", "data/datacite.json", "data/ro-crate-metadata.json", "data/trajectories/traj-001.h5", "data/provenance/traj-001.json"} {
		if !strings.Contains(string(m), " "+want+"\n") {
			t.Errorf("%s: manifest lists no %s", a, want)
		}
	}
}

// TestPackShards: pack --shard 0/2 and 1/2 then --gather gives the same
// payload, byte for byte, as a local pack (in process and in worker
// processes) of the same logs with the same SOURCE_DATE_EPOCH
// (reproducible-builds.org specification). A gather before every shard
// is done, after a shard's file was changed, or with other conversion
// settings names what is missing and writes nothing (exit 1); a shard
// run again skips what its ledger says is done and redoes a file whose
// checksum no longer matches. The gather links the shards' files into the
// bag (the same inode) instead of converting again.
func TestPackShards(t *testing.T) {
	dir, deposit := packFixture(t, "3", "100")
	t.Setenv("SOURCE_DATE_EPOCH", "1700000000")
	logs, recipe := filepath.Join(dir, "logs"), repo("testdata", "recipes", "tarnol.yaml")
	packIt := func(out string, extra ...string) (int, string, string) {
		return runCLI(append([]string{"pack", logs, "-o", out, "--deposit", deposit, "--recipe", recipe}, extra...)...)
	}
	for _, j := range []string{"1", "2"} {
		if code, o, e := packIt(filepath.Join(dir, "local"+j), "-j", j); code != 0 {
			t.Fatalf("local pack -j %s: exit %d\n%s%s", j, code, o, e)
		}
	}
	samePayload(t, filepath.Join(dir, "local1"), filepath.Join(dir, "local2"))

	bag := filepath.Join(dir, "bag")
	shard := func(spec, want string) {
		t.Helper()
		code, o, e := packIt(bag, "--shard", spec)
		if code != 0 || !strings.Contains(o, want) {
			t.Fatalf("pack --shard %s: exit %d, want %q in\n%s%s", spec, code, want, o, e)
		}
	}
	gatherFails := func(why string, extra ...string) {
		t.Helper()
		code, o, e := packIt(bag, append([]string{"--gather"}, extra...)...)
		if code != 1 || !strings.Contains(e, why) {
			t.Errorf("gather: exit %d, want 1 and %q in\n%s%s", code, why, o, e)
		}
		if _, err := os.Stat(bag); err == nil {
			t.Fatalf("a failed gather left %s", bag)
		}
	}
	// Shard 0 of 2 takes the first and third trajectory (sorted by name).
	shard("0/2", "shard 0/2: 2 trajectories converted, 0 already done")
	gatherFails("1 of 3 trajectories not converted (or changed since, or converted with other settings): traj-002")
	shard("1/2", "shard 1/2: 1 trajectory converted, 0 already done")
	shard("0/2", "shard 0/2: 0 trajectories converted, 2 already done")
	gatherFails("3 of 3 trajectories not converted", "--bit-exact") // other settings, other files

	// A changed file no longer matches its ledger: gather refuses it and
	// the shard converts it again.
	f := filepath.Join(bag+".shards", "traj-003.h5")
	b, err := os.ReadFile(f)
	if err != nil {
		t.Fatal(err)
	}
	b[len(b)/2] ^= 0xff
	if err := os.WriteFile(f, b, 0o644); err != nil {
		t.Fatal(err)
	}
	gatherFails("1 of 3 trajectories not converted (or changed since, or converted with other settings): traj-003")
	shard("0/2", "shard 0/2: 1 trajectory converted, 1 already done")

	if code, o, e := packIt(bag, "--gather"); code != 0 || !strings.Contains(o, "bundle: "+bag+" (3 trajectories") {
		t.Fatalf("pack --gather: exit %d\n%s%s", code, o, e)
	}
	samePayload(t, filepath.Join(dir, "local1"), bag)
	// The gather converted nothing: the bag's files are the shards' own.
	for _, n := range []string{"traj-001.h5", "traj-002.h5", "traj-003.h5"} {
		a, err1 := os.Stat(filepath.Join(bag, "data", "trajectories", n))
		b, err2 := os.Stat(filepath.Join(bag+".shards", n))
		if err1 != nil || err2 != nil || !os.SameFile(a, b) {
			t.Errorf("%s: the bag's file is not the shard's (%v %v)", n, err1, err2)
		}
	}
	if code, o, e := runCLI("validate", bag); code != 0 {
		t.Errorf("validate: exit %d\n%s%s", code, o, e)
	}
	if code, _, e := packIt(bag, "--shard", "2/2"); code != 2 || !strings.Contains(e, "0 <= I < N") {
		t.Errorf("pack --shard 2/2: exit %d, want 2 and a usage message: %s", code, e)
	}
}
