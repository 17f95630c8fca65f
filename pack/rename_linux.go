package pack

import (
	"errors"
	"os"
	"runtime"
	"syscall"
	"unsafe"
)

// errNoExchange: the kernel or file system cannot exchange two names.
var errNoExchange = errors.New("atomic exchange not supported")

// renameat2(2) flags, from linux/fs.h (uapi): RENAME_NOREPLACE (1 << 0),
// RENAME_EXCHANGE (1 << 1).
const (
	flagNoReplace = 1
	flagExchange  = 2
)

// sysRenameat2 is the system call number of renameat2 (Linux 3.15+), from
// the kernel's syscall tables (arch/x86/entry/syscalls/syscall_64.tbl:
// 316; include/uapi/asm-generic/unistd.h: 276); the standard library's
// syscall package does not export it for amd64. 0: unknown architecture.
func sysRenameat2() uintptr {
	switch runtime.GOARCH {
	case "amd64":
		return 316
	case "arm64", "riscv64", "loong64":
		return 276
	}
	return 0
}

func renameat2(from, to string, flags uintptr) error {
	nr := sysRenameat2()
	if nr == 0 {
		return errNoExchange
	}
	p1, err := syscall.BytePtrFromString(from)
	if err != nil {
		return err
	}
	p2, err := syscall.BytePtrFromString(to)
	if err != nil {
		return err
	}
	const atFDCWD = ^uintptr(99) // AT_FDCWD = -100
	_, _, e := syscall.Syscall6(nr, atFDCWD, uintptr(unsafe.Pointer(p1)), atFDCWD, uintptr(unsafe.Pointer(p2)), flags, 0)
	switch e {
	case 0:
		return nil
	case syscall.ENOSYS, syscall.EINVAL:
		return errNoExchange
	}
	return &os.LinkError{Op: "renameat2", Old: from, New: to, Err: e}
}

// renameExchange swaps the names a and b atomically.
func renameExchange(a, b string) error { return renameat2(a, b, flagExchange) }

// renameNoReplace renames from to to, failing when to exists (even as an
// empty folder, which rename(2) would silently replace).
func renameNoReplace(from, to string) error {
	err := renameat2(from, to, flagNoReplace)
	if errors.Is(err, errNoExchange) {
		if _, serr := os.Lstat(to); serr == nil {
			return &os.LinkError{Op: "rename", Old: from, New: to, Err: os.ErrExist}
		}
		return os.Rename(from, to)
	}
	return err
}
