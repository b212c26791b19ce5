//go:build !linux

package model

// threadCPU is not available here; benchmarks then report wall time only.
func threadCPU() int64 { return -1 }
