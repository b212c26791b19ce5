//go:build !amd64 || purego

package model

func trConv(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	trConvGo(a, lda, b, k, c, ldc)
}

func trConv2(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	trConv(a, lda, b[:k*trPanel], k, c, ldc)
	trConv(a, lda, b[k*trPanel:], k, c[trPanel:], ldc)
}

func adadelta(lr float32, w, g, sq, acc []float32) { adadeltaGo(lr, w, g, sq, acc) }

func trAxpy(alpha float32, x, y []float32) { trAxpyGo(alpha, x, y) }

// trainAVX2 and trainAVX512 are false: there are no assembly kernels on
// this build.
var trainAVX2, trainAVX512 = false, false
