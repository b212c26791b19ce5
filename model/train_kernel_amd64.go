//go:build amd64 && !purego

package model

import "golang.org/x/sys/cpu"

// trainAVX2 selects the assembly kernels; tests turn it off to compare them
// with their plain-Go twins.
var trainAVX2 = cpu.X86.HasAVX2 && cpu.X86.HasFMA

//go:noescape
func trConvAVX2(a *float32, lda int, b *float32, k int, c *float32, ldc int)

//go:noescape
func trAxpyAVX2(alpha float32, x, y *float32, n int)

// trConv is trConvGo, in assembly where the CPU allows.
func trConv(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	if !trainAVX2 || k == 0 {
		trConvGo(a, lda, b, k, c, ldc)
		return
	}
	// Bounds the assembly relies on.
	_ = a[(trRows-1)*lda+k-1]
	_ = b[k*trPanel-1]
	_ = c[(trRows-1)*ldc+trPanel-1]
	trConvAVX2(&a[0], lda, &b[0], k, &c[0], ldc)
}

// trAxpy sets y += alpha * x for the first len(x) elements of y.
func trAxpy(alpha float32, x, y []float32) {
	n := len(x)
	if !trainAVX2 || n < 8 {
		trAxpyGo(alpha, x, y)
		return
	}
	y = y[:n]
	m := n &^ 7
	trAxpyAVX2(alpha, &x[0], &y[0], m)
	if m < n {
		trAxpyGo(alpha, x[m:], y[m:])
	}
}
