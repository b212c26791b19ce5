//go:build amd64 && !purego

package model

import "golang.org/x/sys/cpu"

// trainAVX2 selects the assembly kernels, and trainAVX512 the two-panel
// convolution kernel among them; tests turn them off to compare the
// kernels with each other and with their plain-Go twins.
var (
	trainAVX2   = cpu.X86.HasAVX2 && cpu.X86.HasFMA
	trainAVX512 = trainAVX2 && cpu.X86.HasAVX512F
)

//go:noescape
func trConvAVX2(a *float32, lda int, b *float32, k int, c *float32, ldc int)

//go:noescape
func trConv2AVX512(a *float32, lda int, b *float32, k int, c *float32, ldc int)

//go:noescape
func adadeltaAVX2(lr float32, w, grad, sq, acc *float32, n int)

//go:noescape
func trAxpyAVX2(alpha float32, x, y *float32, n int)

//go:noescape
func trAxpyAVX512(alpha float32, x, y *float32, n int)

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

// trConv2 is trConv for two panels at once: b holds 2*k*trPanel floats
// (panel q, then q+1) and c gets 2*trPanel outputs per row. The results
// are those of two trConv calls, bit for bit.
func trConv2(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	if !trainAVX512 || k == 0 {
		trConv(a, lda, b[:k*trPanel], k, c, ldc)
		trConv(a, lda, b[k*trPanel:], k, c[trPanel:], ldc)
		return
	}
	_ = a[(trRows-1)*lda+k-1]
	_ = b[2*k*trPanel-1]
	_ = c[(trRows-1)*ldc+2*trPanel-1]
	trConv2AVX512(&a[0], lda, &b[0], k, &c[0], ldc)
}

// trAxpy sets y += alpha * x for the first len(x) elements of y.
func trAxpy(alpha float32, x, y []float32) {
	n := len(x)
	if !trainAVX2 || n < 8 {
		trAxpyGo(alpha, x, y)
		return
	}
	y = y[:n]
	if trainAVX512 && n >= 16 {
		m := n &^ 15
		trAxpyAVX512(alpha, &x[0], &y[0], m)
		if m == n {
			return
		}
		x, y, n = x[m:], y[m:], n-m
		if n < 8 {
			trAxpyGo(alpha, x, y)
			return
		}
	}
	m := n &^ 7
	trAxpyAVX2(alpha, &x[0], &y[0], m)
	if m < n {
		trAxpyGo(alpha, x[m:], y[m:])
	}
}

// adadelta is adadeltaGo, eight elements at a time in assembly where the
// CPU allows; the results are the same bit for bit.
func adadelta(lr float32, w, g, sq, acc []float32) {
	n := len(g)
	if !trainAVX2 || n < 8 {
		adadeltaGo(lr, w, g, sq, acc)
		return
	}
	w, sq, acc = w[:n], sq[:n], acc[:n]
	m := n &^ 7
	adadeltaAVX2(lr, &w[0], &g[0], &sq[0], &acc[0], m)
	if m < n {
		adadeltaGo(lr, w[m:], g[m:], sq[m:], acc[m:])
	}
}
