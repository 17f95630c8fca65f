package outdir

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"

	"golang.org/x/sys/unix"
)

// Leftovers of killed runs (issue 12, item 6). A run that is killed
// (SIGKILL, power loss) cannot remove its temporary output. Every
// temporary output the tool makes therefore gets a marker file beside
// it, NAME + MarkerSuffix, saying which process made it and which
// file-system object it is (device, inode, birth time). A later run writing into
// the same folder removes a temporary output only when its marker is
// valid, the process that wrote the marker is gone, and the object at
// the name is still the one the marker records: nothing without a
// marker, nothing of a live run, nothing put at that name since (a
// user's own X.partial is never touched).

// MarkerSuffix ends the name of every marker file.
const MarkerSuffix = ".trajvault-owner"

// markerMagic opens every marker; a file without it is not a marker.
const markerMagic = "trajvault temporary output v1\n"

// maxMarker bounds what is read of a file taken for a marker.
const maxMarker = 4096

var (
	mu   sync.Mutex
	mine []string // markers this process wrote (Tidy)
)

// Mark writes the marker of tmp, a temporary output (file or folder) this
// process has just made, whose name must be hidden (start with ".").
func Mark(tmp string) error {
	if !strings.HasPrefix(filepath.Base(tmp), ".") {
		panic("outdir: Mark of a name that is not hidden: " + tmp)
	}
	id, err := identify(tmp)
	if err != nil {
		return err
	}
	start, boot := processStart(os.Getpid())
	body := fmt.Sprintf("%spid %d\nstart %s\nboot %s\nobject %s\n", markerMagic, os.Getpid(), start, boot, id)
	m := tmp + MarkerSuffix
	f, err := os.OpenFile(m, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return err
	}
	_, err = f.WriteString(body)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		os.Remove(m)
		return err
	}
	mu.Lock()
	mine = append(mine, m)
	mu.Unlock()
	return nil
}

// Unmark removes the marker of tmp, a temporary output of this process
// that is gone (removed, or linked into place and removed): for callers
// that end their output's life before the run ends.
func Unmark(tmp string) {
	m := tmp + MarkerSuffix
	mu.Lock()
	defer mu.Unlock()
	for i, x := range mine {
		if x == m {
			os.Remove(m)
			mine = append(mine[:i], mine[i+1:]...)
			return
		}
	}
}

// Tidy removes the markers this process wrote whose temporary output is
// gone (renamed into place, or removed): call it when a run ends. A
// marker whose output is still there is left for a later Clean.
func Tidy() {
	mu.Lock()
	defer mu.Unlock()
	keep := mine[:0]
	for _, m := range mine {
		if _, err := os.Lstat(strings.TrimSuffix(m, MarkerSuffix)); os.IsNotExist(err) {
			os.Remove(m)
			continue
		}
		keep = append(keep, m)
	}
	mine = keep
}

// Clean removes, in folder dir, the temporary outputs of runs that were
// killed, by their markers (see Mark), and markers left without an
// output. It returns what it removed. Errors of single entries are
// skipped: a leftover that cannot be removed now is tried next time.
func Clean(dir string) []string {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil
	}
	var removed []string
	for _, e := range entries {
		name := e.Name()
		if !strings.HasPrefix(name, ".") || !strings.HasSuffix(name, MarkerSuffix) || !e.Type().IsRegular() {
			continue
		}
		m := filepath.Join(dir, name)
		mk, ok := readMarker(m)
		if !ok || mk.alive() {
			continue
		}
		target := strings.TrimSuffix(m, MarkerSuffix)
		switch id, err := identify(target); {
		case errors.Is(err, syscall.ENOENT):
			os.Remove(m) // the output was finished or removed
		case err != nil:
			continue
		case id == mk.object:
			if os.RemoveAll(target) == nil {
				os.Remove(m)
				removed = append(removed, target)
			}
		default:
			os.Remove(m) // something else has the name now: not ours
		}
	}
	return removed
}

type marker struct {
	pid                 int
	start, boot, object string
}

// identify names the file-system object at path (not following a
// symbolic link): device, inode and birth time (statx(2)), since a freed
// inode number is soon given to a new file. Where the file system keeps
// no birth time, device and inode alone.
func identify(path string) (string, error) {
	var st unix.Statx_t
	if err := unix.Statx(unix.AT_FDCWD, path, unix.AT_SYMLINK_NOFOLLOW, unix.STATX_INO|unix.STATX_BTIME, &st); err != nil {
		return "", err
	}
	id := fmt.Sprintf("%d:%d:%d", unix.Mkdev(st.Dev_major, st.Dev_minor), st.Ino, st.Mask&unix.STATX_BTIME)
	if st.Mask&unix.STATX_BTIME != 0 {
		id += fmt.Sprintf(":%d.%09d", st.Btime.Sec, st.Btime.Nsec)
	}
	return id, nil
}

// readMarker parses a marker file; ok is false for anything that is not
// one written by Mark.
func readMarker(path string) (marker, bool) {
	f, err := os.Open(path)
	if err != nil {
		return marker{}, false
	}
	defer f.Close()
	b := make([]byte, maxMarker)
	n, _ := f.Read(b)
	b = b[:n]
	if !bytes.HasPrefix(b, []byte(markerMagic)) {
		return marker{}, false
	}
	var mk marker
	seen := 0
	for _, l := range strings.Split(string(b[len(markerMagic):]), "\n") {
		k, v, _ := strings.Cut(l, " ")
		var err error
		switch k {
		case "pid":
			mk.pid, err = strconv.Atoi(v)
		case "start":
			mk.start = v
		case "boot":
			mk.boot = v
		case "object":
			mk.object = v
		default:
			continue
		}
		if err != nil {
			return marker{}, false
		}
		seen++
	}
	return mk, seen == 4 && mk.pid > 0 && mk.object != ""
}

// alive reports whether the process that wrote the marker may still be
// running: same boot, and a process with that number that started at the
// same time (a reused process number has another start time). When this
// cannot be told (no /proc), a process with that number counts as alive.
func (mk marker) alive() bool {
	start, boot := processStart(mk.pid)
	if boot != "" && mk.boot != "" && boot != mk.boot {
		return false
	}
	if err := syscall.Kill(mk.pid, 0); errors.Is(err, syscall.ESRCH) {
		return false
	}
	if start != "" && mk.start != "" {
		return start == mk.start
	}
	return true
}

// processStart returns the start time of process pid in clock ticks
// since boot (proc(5): /proc/PID/stat field 22) and the boot's id
// (/proc/sys/kernel/random/boot_id); "" when unknown.
func processStart(pid int) (start, boot string) {
	if b, err := os.ReadFile("/proc/sys/kernel/random/boot_id"); err == nil {
		boot = strings.TrimSpace(string(b))
	}
	b, err := os.ReadFile("/proc/" + strconv.Itoa(pid) + "/stat")
	if err != nil {
		return "", boot
	}
	// The command name (field 2) is in parentheses and may hold spaces.
	s := string(b)
	i := strings.LastIndexByte(s, ')')
	if i < 0 {
		return "", boot
	}
	f := strings.Fields(s[i+1:]) // from field 3 on
	if len(f) < 20 {
		return "", boot
	}
	return f[19], boot
}
