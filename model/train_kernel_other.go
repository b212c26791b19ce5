//go:build !amd64 || purego

package model

func trConv(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	trConvGo(a, lda, b, k, c, ldc)
}

func trAxpy(alpha float32, x, y []float32) { trAxpyGo(alpha, x, y) }

// trainAVX2 is false: there are no assembly kernels on this build.
var trainAVX2 = false
