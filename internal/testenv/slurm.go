package testenv

import (
	"crypto/rand"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// Slurm starts a throw-away single-node SLURM cluster (Debian 12's
// slurmctld, slurmd and munge) with every file under a temporary folder,
// sets SLURM_CONF for the test so that sbatch, squeue and scontrol talk
// to it, and tears it down when the test ends. It skips the test when the
// packages are missing (make test installs them as root) or when the test
// does not run as root (the daemons run as SlurmUser=root here).
//
// Settings that work without systemd or cgroups, measured on Debian 12
// with SLURM 22.05 (common practice for single-node test clusters):
// proctrack/linuxproc, task/none, no accounting, munge on a private
// socket.
func Slurm(t *testing.T) {
	t.Helper()
	for _, b := range []string{"slurmctld", "slurmd", "munged", "sbatch", "scontrol", "sinfo"} {
		if _, err := exec.LookPath(b); err != nil {
			if _, err := os.Stat("/usr/sbin/" + b); err != nil {
				t.Skipf("SLURM not installed (%s missing): Debian packages slurmctld slurmd slurm-client munge (make test installs them as root)", b)
			}
		}
	}
	if os.Geteuid() != 0 {
		t.Skip("the test SLURM cluster runs its daemons as root; run the test as root")
	}
	dir, err := os.MkdirTemp("", "tv-slurm-")
	if err != nil {
		t.Fatal(err)
	}
	os.Chmod(dir, 0o755)
	var procs []*exec.Cmd
	start := func(name string, args ...string) {
		cmd := exec.Command(name, args...)
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), "SLURM_CONF="+filepath.Join(dir, "slurm.conf"))
		cmd.Stdout, _ = os.Create(filepath.Join(dir, filepath.Base(name)+".out"))
		cmd.Stderr = cmd.Stdout
		cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
		if err := cmd.Start(); err != nil {
			t.Fatalf("start %s: %v", name, err)
		}
		procs = append(procs, cmd)
	}
	t.Cleanup(func() {
		exec.Command("scontrol", "shutdown").Run()
		time.Sleep(500 * time.Millisecond)
		for i := len(procs) - 1; i >= 0; i-- {
			p := procs[i]
			syscall.Kill(-p.Process.Pid, syscall.SIGTERM)
			done := make(chan struct{})
			go func() { p.Wait(); close(done) }()
			select {
			case <-done:
			case <-time.After(5 * time.Second):
				syscall.Kill(-p.Process.Pid, syscall.SIGKILL)
				<-done
			}
		}
		if t.Failed() {
			for _, l := range []string{"slurmctld.log", "slurmd.log", "munged.log"} {
				if b, err := os.ReadFile(filepath.Join(dir, l)); err == nil {
					t.Logf("%s (tail):\n%s", l, tail(string(b), 3000))
				}
			}
		}
		os.RemoveAll(dir)
	})

	// munge: a private key and socket.
	md := filepath.Join(dir, "munge")
	os.MkdirAll(md, 0o755)
	key := make([]byte, 1024)
	rand.Read(key)
	keyFile := filepath.Join(md, "munge.key")
	if err := os.WriteFile(keyFile, key, 0o400); err != nil {
		t.Fatal(err)
	}
	sock := filepath.Join(md, "munge.socket.2")
	start(munged(), "--foreground", "--force", "--socket="+sock, "--key-file="+keyFile,
		"--log-file="+filepath.Join(dir, "munged.log"), "--pid-file="+filepath.Join(md, "munged.pid"),
		"--seed-file="+filepath.Join(md, "munged.seed"))
	waitFor(t, 10*time.Second, "munge socket", func() bool { _, err := os.Stat(sock); return err == nil })

	// slurmctld runs only on the host named SlurmctldHost (its short
	// host name); the node may have a name of its own (slurmd -N).
	ctl, err := os.Hostname()
	if err != nil {
		t.Fatal(err)
	}
	ctl, _, _ = strings.Cut(ctl, ".")
	host := "tvnode"
	spool := filepath.Join(dir, "spool")
	os.MkdirAll(spool, 0o755)
	os.MkdirAll(filepath.Join(dir, "state"), 0o755)
	conf := fmt.Sprintf(`ClusterName=trajvaulttest
SlurmctldHost=%[7]s(127.0.0.1)
SlurmctldPort=%[2]d
SlurmdPort=%[3]d
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=%[4]s
StateSaveLocation=%[5]s/state
SlurmdSpoolDir=%[6]s
SlurmctldPidFile=%[5]s/slurmctld.pid
SlurmdPidFile=%[5]s/slurmd.pid
SlurmctldLogFile=%[5]s/slurmctld.log
SlurmdLogFile=%[5]s/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=none
MailProg=/bin/true
SwitchType=switch/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
ReturnToService=2
SchedulerParameters=batch_sched_delay=0,sched_min_interval=0
SlurmdParameters=config_overrides
NodeName=%[1]s NodeAddr=127.0.0.1 CPUs=4 State=UNKNOWN
PartitionName=test Nodes=%[1]s Default=YES MaxTime=INFINITE State=UP
`, host, freePort(t), freePort(t), sock, dir, spool, ctl)
	if err := os.WriteFile(filepath.Join(dir, "slurm.conf"), []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	t.Setenv("SLURM_CONF", filepath.Join(dir, "slurm.conf"))
	start("/usr/sbin/slurmctld", "-D")
	start("/usr/sbin/slurmd", "-D", "-N", host)
	waitFor(t, 30*time.Second, "the node to be idle", func() bool {
		out, err := exec.Command("sinfo", "-h", "-N", "-o", "%T").Output()
		return err == nil && strings.TrimSpace(string(out)) == "idle"
	})
}

// WaitSlurmJob polls scontrol until job id ends and returns its state
// (COMPLETED, FAILED, CANCELLED, ...). A dependent job whose dependency
// failed would wait for ever, hence the timeout.
func WaitSlurmJob(t *testing.T, id string, timeout time.Duration) string {
	t.Helper()
	var state string
	waitFor(t, timeout, "job "+id+" to end", func() bool {
		out, err := exec.Command("scontrol", "show", "job", "-o", id).Output()
		if err != nil {
			return false
		}
		for _, f := range strings.Fields(string(out)) {
			if s, ok := strings.CutPrefix(f, "JobState="); ok {
				state = s
			}
		}
		switch state {
		case "PENDING", "RUNNING", "CONFIGURING", "COMPLETING", "":
			return false
		}
		return true
	})
	return state
}

func munged() string {
	if p, err := exec.LookPath("munged"); err == nil {
		return p
	}
	return "/usr/sbin/munged"
}

func freePort(t *testing.T) int {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

func waitFor(t *testing.T, timeout time.Duration, what string, ok func() bool) {
	t.Helper()
	end := time.Now().Add(timeout)
	for !ok() {
		if time.Now().After(end) {
			t.Fatalf("test SLURM: timed out after %v waiting for %s", timeout, what)
		}
		time.Sleep(200 * time.Millisecond)
	}
}

func tail(s string, n int) string {
	if len(s) > n {
		return s[len(s)-n:]
	}
	return s
}
