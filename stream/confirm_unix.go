//go:build unix

package stream

import (
	"os"
	"syscall"
)

// lockFile takes an exclusive advisory lock (flock) on f, waiting for it.
func lockFile(f *os.File) error {
	for {
		err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX)
		if err != syscall.EINTR {
			return err
		}
	}
}

func unlockFile(f *os.File) { syscall.Flock(int(f.Fd()), syscall.LOCK_UN) }
