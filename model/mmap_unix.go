//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package model

import (
	"fmt"
	"os"

	"golang.org/x/sys/unix"
)

// mapFile maps the file at path read-only and shared, so processes that
// open the same model share its pages. It returns the bytes and the
// function that unmaps them; what is not a regular file is read instead
// (readFile, at most MaxReadSize bytes). An empty file is not mapped (mmap
// refuses length zero); the loader then rejects it as too short.
func mapFile(path string) ([]byte, func() error, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close() // the mapping outlives the descriptor
	fi, err := f.Stat()
	if err != nil {
		return nil, nil, err
	}
	if !fi.Mode().IsRegular() {
		// A pipe or device (say, /dev/fd/3) cannot be mapped; read it.
		return readFile(path)
	}
	size := fi.Size()
	if size == 0 {
		return []byte{}, nil, nil
	}
	if size != int64(int(size)) {
		return nil, nil, fmt.Errorf("%s: %d bytes is too large to map", path, size)
	}
	b, err := unix.Mmap(int(f.Fd()), 0, int(size), unix.PROT_READ, unix.MAP_SHARED)
	if err != nil {
		return nil, nil, fmt.Errorf("mmap %s: %w", path, err)
	}
	return b, func() error { return unix.Munmap(b) }, nil
}
