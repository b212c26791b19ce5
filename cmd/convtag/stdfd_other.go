//go:build !unix

package main

import "os"

// stdoutClosedAtStart cannot tell here; see stdfd_unix.go.
func stdoutClosedAtStart(*os.File) bool { return false }
