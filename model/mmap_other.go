//go:build !(linux || darwin || freebsd || netbsd || openbsd || dragonfly)

package model

// mapFile reads the whole file where this package does not use mmap.
func mapFile(path string) ([]byte, func() error, error) { return readFile(path) }
