package main

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"os/signal"
	"path/filepath"
	"syscall"

	"convtag/stream"
)

// errInterrupted is what a command returns after SIGINT or SIGTERM; it
// exits with exitFailure, as tag does.
var errInterrupted = errors.New("interrupted")

// notifyInterrupt returns a context cancelled by the first SIGINT or
// SIGTERM. The signals stay caught until stop is called, so that nothing
// the command is writing (a temporary file being renamed into place) is
// cut short by the default action.
func notifyInterrupt() (ctx context.Context, stop context.CancelFunc) {
	return signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
}

// untilDone runs fn in its own goroutine and returns its results, or
// errInterrupted as soon as ctx is done. In the latter case fn goes on
// until the process ends, so fn must leave nothing behind that outlives
// the run (it only reads).
func untilDone[T any](ctx context.Context, fn func() (T, error)) (T, error) {
	type result struct {
		v   T
		err error
	}
	ch := make(chan result, 1)
	go func() {
		v, err := fn()
		ch <- result{v, err}
	}()
	select {
	case r := <-ch:
		return r.v, r.err
	case <-ctx.Done():
		var zero T
		return zero, withCode(exitFailure, errInterrupted)
	}
}

// checkOutput makes sure, before any long work, that the file named by
// -o can be written: path is not a directory or other non-regular file,
// is none of the inputs (by os.SameFile, so links count), and a file can
// be created beside it (one is, and removed). cmd names the command in
// the error. An input of "" or "-" is skipped.
func checkOutput(cmd, path string, inputs ...string) error {
	st, err := os.Stat(path)
	switch {
	case err == nil && st.IsDir():
		return usageErr("-o "+filepath.Join(path, "NAME"), "%s: -o %s is a directory", cmd, path)
	case err == nil && !st.Mode().IsRegular():
		return usageErr("-o FILE", "%s: -o %s is not a regular file", cmd, path)
	case err == nil:
		for _, in := range inputs {
			if in == "" || in == "-" {
				continue
			}
			if ist, err := os.Stat(in); err == nil && os.SameFile(st, ist) {
				return usageErr("write to another file", "%s: -o %s is the input file %s; it would be replaced", cmd, path, in)
			}
		}
	case !errors.Is(err, fs.ErrNotExist) && !errors.Is(err, syscall.ENOTDIR):
		return withCode(exitFailure, fmt.Errorf("%s: -o %s: %w", cmd, path, pathErr(err)))
	}
	dir := filepath.Dir(path)
	if dst, err := os.Stat(dir); err != nil && !errors.Is(err, syscall.ENOTDIR) {
		return withCode(exitFailure, fmt.Errorf("%s: -o %s: %s: %w", cmd, path, dir, pathErr(err)))
	} else if err != nil {
		return withCode(exitFailure, fmt.Errorf("%s: -o %s: a parent of %s is not a directory", cmd, path, dir))
	} else if !dst.IsDir() {
		return withCode(exitFailure, fmt.Errorf("%s: -o %s: %s is not a directory", cmd, path, dir))
	}
	// The same temporary file the output will be written to, made and
	// dropped: proof that it can be.
	f, err := stream.CreateOutputFile(path)
	if err != nil {
		if u := errors.Unwrap(err); u != nil {
			err = u
		}
		return withCode(exitFailure, fmt.Errorf("%s: -o %s: cannot create a file in %s: %w", cmd, path, dir, pathErr(err)))
	}
	f.Discard()
	return nil
}

// pathErr is err without the *fs.PathError's operation and path, which
// the caller names better.
func pathErr(err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}
