package h5

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// TestErrorStack provokes failures and checks that the error carries the
// file name, HDF5's error stack and, where the OS said why, the errno.
func TestErrorStack(t *testing.T) {
	dir := t.TempDir()
	// open(2) of a path whose folder is missing fails with ENOENT (POSIX,
	// open: "A component of path does not name an existing file").
	missing := filepath.Join(dir, "no-such-folder", "out.h5")
	_, err := Create(missing)
	var he *Error
	if !errors.As(err, &he) || !errors.Is(err, syscall.ENOENT) || len(he.Stack) == 0 {
		t.Fatalf("create in a missing folder: %#v (%v), want *Error with ENOENT and a stack", err, err)
	}
	if msg := err.Error(); !strings.Contains(msg, missing) || !strings.Contains(msg, "no such file or directory") || !strings.Contains(msg, "(HDF5: ") {
		t.Errorf("message %q lacks the file, the errno text or the stack", msg)
	}

	path := filepath.Join(dir, "s.h5")
	build(t, path)
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	_, _, err = f.ReadFloat64("/a/missing")
	if !errors.As(err, &he) || he.File != path || he.Path != "/a/missing" || he.Errno != 0 {
		t.Fatalf("read of a missing dataset: %#v", err)
	}
	found := false
	for _, s := range he.Stack {
		found = found || s.Func == "H5Dopen2"
	}
	if !found {
		t.Errorf("stack %+v has no H5Dopen2 entry", he.Stack)
	}
	// The stack belongs to the failing call only: a good call after it
	// succeeds and the next failure carries its own stack.
	if _, _, err := f.ReadFloat64("/a/b/x"); err != nil {
		t.Fatal(err)
	}
	_, err = f.Attr("/a", "nope")
	if !errors.As(err, &he) || he.Name != "nope" || len(he.Stack) == 0 || he.Stack[0].Func != "H5Aopen_by_name" {
		t.Errorf("missing attribute: %#v", err)
	}
	// Writes to a read-only file never reach HDF5.
	if err := f.SetString("/a", "x", "y"); !errors.Is(err, ErrReadOnly) {
		t.Errorf("write to read-only file: %v", err)
	}
}

// TestFullDisk fills a 5 MiB tmpfs: the write error must say "no space
// left on device" (ENOSPC) and name the output file. The small file
// system comes from, in this order: TRAJVAULT_SMALL_FS (a folder on a
// small file system someone mounted; no privileges needed), a mount as
// root when TRAJVAULT_ALLOW_MOUNT=1 permits it, or a private mount in a
// user namespace of its own (unshare(2); no root needed where the
// kernel allows unprivileged user namespaces, and nothing outside the
// test sees the mount). With none of these it is skipped, saying why.
func TestFullDisk(t *testing.T) {
	if mnt := os.Getenv("TRAJVAULT_FULLDISK_NS"); mnt != "" {
		// In the user and mount namespace made below: make every mount
		// private first, so that nothing propagates out.
		if err := syscall.Mount("", "/", "", syscall.MS_REC|syscall.MS_PRIVATE, ""); err != nil {
			t.Skipf("full-disk test skipped: cannot make mounts private in the namespace: %v", err)
		}
		if err := syscall.Mount("tmpfs", mnt, "tmpfs", 0, "size=5m"); err != nil {
			t.Skipf("full-disk test skipped: cannot mount a tmpfs in the namespace: %v", err)
		}
		fillDisk(t, mnt)
		return
	}
	if dir := os.Getenv("TRAJVAULT_SMALL_FS"); dir != "" {
		var fs syscall.Statfs_t
		if err := syscall.Statfs(dir, &fs); err != nil || uint64(fs.Bavail)*uint64(fs.Bsize) > 12<<20 {
			t.Fatalf("TRAJVAULT_SMALL_FS=%s: %v, %d bytes free; give a folder on a file system with under 12 MiB free", dir, err, uint64(fs.Bavail)*uint64(fs.Bsize))
		}
		sub, err := os.MkdirTemp(dir, "trajvault-fulldisk-")
		if err != nil {
			t.Fatal(err)
		}
		defer os.RemoveAll(sub)
		fillDisk(t, sub)
		return
	}
	if os.Getenv("TRAJVAULT_ALLOW_MOUNT") == "1" && os.Geteuid() == 0 {
		mnt := t.TempDir()
		if out, err := exec.Command("mount", "-t", "tmpfs", "-o", "size=5m", "tmpfs", mnt).CombinedOutput(); err != nil {
			t.Skipf("full-disk test skipped: mount failed: %v %s", err, out)
		}
		defer exec.Command("umount", mnt).Run()
		fillDisk(t, mnt)
		return
	}
	mnt := t.TempDir()
	cmd := exec.Command(os.Args[0], "-test.run=^TestFullDisk$", "-test.v")
	cmd.Env = append(os.Environ(), "TRAJVAULT_FULLDISK_NS="+mnt)
	cmd.SysProcAttr = &syscall.SysProcAttr{
		Cloneflags:  syscall.CLONE_NEWUSER | syscall.CLONE_NEWNS,
		UidMappings: []syscall.SysProcIDMap{{ContainerID: 0, HostID: os.Getuid(), Size: 1}},
		GidMappings: []syscall.SysProcIDMap{{ContainerID: 0, HostID: os.Getgid(), Size: 1}},
	}
	out, err := cmd.CombinedOutput()
	switch {
	case err != nil && cmd.ProcessState == nil:
		t.Skipf("full-disk test skipped: no small file system: not root with TRAJVAULT_ALLOW_MOUNT=1, no TRAJVAULT_SMALL_FS=DIR, and no user namespace (%v)", err)
	case err != nil:
		t.Fatalf("in a user namespace: %v\n%s", err, out)
	case bytes.Contains(out, []byte("--- SKIP")):
		t.Skipf("full-disk test skipped: in a user namespace:\n%s", out)
	case !bytes.Contains(out, []byte("--- PASS: TestFullDisk")):
		t.Fatalf("in a user namespace, no result:\n%s", out)
	}
	t.Logf("in a user namespace:\n%s", out)
}

// fillDisk writes 15 MiB into a file in mnt, a 5 MiB file system:
// unfiltered through the library, then as whole chunks encoded in Go and
// stored directly (random values at 15 decimals, about 53 bits each,
// which deflate does not shrink).
func fillDisk(t *testing.T, mnt string) {
	rng := rand.New(rand.NewPCG(1, 2))
	for i, fl := range []Filters{{}, {ScaleOffsetFloat: true, ScaleOffsetDigits: 15, Deflate: 1, Fletcher32: true}} {
		out := filepath.Join(mnt, fmt.Sprintf("out%d.h5", i))
		f, err := Create(out)
		if err != nil {
			t.Fatal(err)
		}
		w, err := f.CreateDataset("/particles/all/position/value", DatasetSpec{Type: Float64, Dims: []int{0, 3},
			MaxDims: []int{Unlimited, 3}, Chunk: []int{4096, 3}, Filters: fl})
		if err != nil {
			t.Fatal(err)
		}
		if (w.direct != nil) != (i == 1) {
			t.Fatalf("filters %+v: direct path %v", fl, w.direct != nil)
		}
		block := make([]float64, 3*65536) // 1.5 MiB per append
		for i := range block {
			block[i] = rng.NormFloat64()
		}
		for i := 0; i < 10 && err == nil; i++ {
			err = w.Append(block)
		}
		if cerr := w.Close(); err == nil {
			err = cerr
		}
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		if !errors.Is(err, syscall.ENOSPC) {
			t.Fatalf("15 MiB into 5 MiB, filters %+v: %v, want ENOSPC", fl, err)
		}
		if msg := err.Error(); !strings.Contains(msg, out) || !strings.Contains(msg, "no space left on device") {
			t.Errorf("message %q lacks the file or the cause", msg)
		}
		t.Log(err)
		os.Remove(out)
	}
}
