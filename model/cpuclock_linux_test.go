package model

import "golang.org/x/sys/unix"

// threadCPU returns the calling OS thread's CPU time in nanoseconds, or -1.
// Benchmarks lock their goroutine to its thread and report CPU time beside
// wall time: on a shared, loaded machine it is far steadier.
func threadCPU() int64 {
	var ts unix.Timespec
	if unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &ts) != nil {
		return -1
	}
	return ts.Nano()
}
