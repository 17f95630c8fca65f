package validate

import (
	"errors"
	"fmt"
	"io"
	"os"
	"syscall"
)

// spool holds archive members on disk while they are checked, so that
// validating an archive takes memory independent of its members' sizes
// (issue 14: one 101 MB member took 390 MiB RSS when held in memory).
// Its folder is private (os.MkdirTemp: mode 0700, a fresh name in the
// system's temporary folder); files in it are named by the tool, never by
// the archive, and each is removed once checked; Close removes the
// folder.
type spool struct {
	dir string
	max int64 // largest member accepted, bytes
}

// errSpoolFull marks a member that does not fit: its declared size is
// above the limit or the free space (a finding, never an allocation).
var errSpoolFull = errors.New("does not fit the temporary folder")

// freeBytes is the space an unprivileged process may still write in dir
// (statfs(2): available blocks times the block size); a variable so
// that tests can make the disk look full.
var freeBytes = func(dir string) (int64, error) {
	var st syscall.Statfs_t
	if err := syscall.Statfs(dir, &st); err != nil {
		return 0, err
	}
	return int64(st.Bavail) * int64(st.Bsize), nil
}

func newSpool(max int64) (*spool, error) {
	dir, err := os.MkdirTemp("", "trajvault-members-")
	if err != nil {
		return nil, fmt.Errorf("temporary folder for archive members: %w", err)
	}
	return &spool{dir: dir, max: max}, nil
}

// write copies one member of declared size from r into a new file of the
// spool and returns its path; the caller removes it (release). A
// declared size above the limit or the free space is errSpoolFull before
// anything is written; a member that ends before its declared size is
// an error (io.ErrUnexpectedEOF), never a shorter file checked as whole.
func (s *spool) write(size int64, r io.Reader) (string, error) {
	if size < 0 || size > s.max {
		return "", fmt.Errorf("%w: %d bytes declared, limit %d", errSpoolFull, size, s.max)
	}
	free, err := freeBytes(s.dir)
	if err != nil {
		return "", fmt.Errorf("free space of %s: %w", s.dir, err)
	}
	if size > free {
		return "", fmt.Errorf("%w: %d bytes declared, %d free", errSpoolFull, size, free)
	}
	f, err := os.CreateTemp(s.dir, "member-*.h5")
	if err != nil {
		return "", err
	}
	n, err := io.Copy(f, io.LimitReader(r, size))
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil && n < size {
		err = fmt.Errorf("%w: %d of %d declared bytes", io.ErrUnexpectedEOF, n, size)
	}
	if err != nil {
		os.Remove(f.Name())
		return "", err
	}
	return f.Name(), nil
}

// release removes one member's file.
func (s *spool) release(path string) { os.Remove(path) }

// Close removes the spool's folder and whatever is left in it.
func (s *spool) Close() error { return os.RemoveAll(s.dir) }
