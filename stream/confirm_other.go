//go:build !unix

package stream

import "os"

// lockFile does nothing here: several instances must not share a file.
func lockFile(f *os.File) error { return nil }

func unlockFile(f *os.File) {}
