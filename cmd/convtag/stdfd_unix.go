//go:build unix

package main

import (
	"os"

	"golang.org/x/sys/unix"
)

// stdoutClosedAtStart reports whether f, the process's standard output,
// was closed when the program started (`convtag >&-`). The Go runtime then
// opens /dev/null read-write on the descriptor, so writes would succeed
// and go nowhere; a shell's `>/dev/null` opens it write-only, which is an
// ordinary request to discard the output.
func stdoutClosedAtStart(f *os.File) bool {
	if f != os.Stdout {
		return false
	}
	rc, err := f.SyscallConn()
	if err != nil {
		return false
	}
	closed := false
	rc.Control(func(fd uintptr) {
		fl, err := unix.FcntlInt(fd, unix.F_GETFL, 0)
		if err != nil {
			closed = err == unix.EBADF
			return
		}
		if fl&unix.O_ACCMODE != unix.O_RDWR {
			return
		}
		var st, null unix.Stat_t
		if unix.Fstat(int(fd), &st) != nil || unix.Stat(os.DevNull, &null) != nil {
			return
		}
		closed = st.Mode&unix.S_IFMT == unix.S_IFCHR && st.Rdev == null.Rdev
	})
	return closed
}
