package sgns

import "golang.org/x/sys/cpu"

// useAVX2 picks the AVX2+FMA kernels, chosen once at start-up.
var useAVX2 = cpu.X86.HasAVX2 && cpu.X86.HasFMA

// dotAVX2 is dotGeneric with 256-bit fused multiply-adds; len(y) >= len(x).
//
//go:noescape
func dotAVX2(x, y []float32) float32

// axpyAVX2 is axpyGeneric with 256-bit fused multiply-adds; len(y) >= len(x).
//
//go:noescape
func axpyAVX2(a float32, x, y []float32)

// dot is the inner product of x and y[:len(x)].
func dot(x, y []float32) float32 {
	if useAVX2 {
		_ = y[:len(x)]
		return dotAVX2(x, y)
	}
	return dotGeneric(x, y)
}

// axpy adds a·x to y[:len(x)].
func axpy(a float32, x, y []float32) {
	if useAVX2 {
		_ = y[:len(x)]
		axpyAVX2(a, x, y)
		return
	}
	axpyGeneric(a, x, y)
}
