package kernel

import "math"

// convGeneric is Set.Conv in plain Go.
func convGeneric(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	var acc [ConvRows][ConvPanel]float32
	a0, a1, a2, a3 := a[:k], a[lda:lda+k], a[2*lda:2*lda+k], a[3*lda:3*lda+k]
	b = b[:k*ConvPanel]
	for t := range k {
		bt := (*[ConvPanel]float32)(b[t*ConvPanel:])
		x0, x1, x2, x3 := a0[t], a1[t], a2[t], a3[t]
		for j, v := range bt {
			acc[0][j] += x0 * v
			acc[1][j] += x1 * v
			acc[2][j] += x2 * v
			acc[3][j] += x3 * v
		}
	}
	for r := range ConvRows {
		copy(c[r*ldc:r*ldc+ConvPanel], acc[r][:])
	}
}

// axpyGeneric is Set.Axpy in plain Go.
func axpyGeneric(alpha float32, x, y []float32) {
	y = y[:len(x)]
	for i, v := range x {
		y[i] += alpha * v
	}
}

// conv2Generic is Set.Conv2 as two calls of conv.
func conv2Generic(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	convGeneric(a, lda, b[:k*ConvPanel], k, c, ldc)
	convGeneric(a, lda, b[k*ConvPanel:], k, c[ConvPanel:], ldc)
}

// adadeltaGeneric is Set.Adadelta in plain Go. Every product is rounded to
// float32 by an explicit conversion, so the compiler cannot fuse it into a
// multiply-add and the assembly twin matches bit for bit on every GOAMD64
// level.
func adadeltaGeneric(lr float32, w, g, sq, acc []float32) {
	const rho, eps = AdadeltaRho, AdadeltaEps
	w, sq, acc = w[:len(g)], sq[:len(g)], acc[:len(g)]
	for i, gi := range g {
		sq[i] = float32(rho*sq[i]) + float32(float32((1-rho)*gi)*gi)
		delta := float32(sqrt32(acc[i]+eps)/sqrt32(sq[i]+eps)) * gi
		acc[i] = float32(rho*acc[i]) + float32(float32((1-rho)*delta)*delta)
		w[i] -= float32(lr * delta)
	}
}

func sqrt32(x float32) float32 { return float32(math.Sqrt(float64(x))) }
