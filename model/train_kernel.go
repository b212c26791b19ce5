package model

// trConvGo is the portable twin of the convolution kernel: for r <
// trRows and c < trPanel it sets
//
//	c[r*ldc + c] = sum_{t<k} a[r*lda + t] * b[t*trPanel + c]
//
// a's rows may overlap (lda < k): window r of a text starts lda floats
// after window r-1.
func trConvGo(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	var acc [trRows][trPanel]float32
	a0, a1, a2, a3 := a[:k], a[lda:lda+k], a[2*lda:2*lda+k], a[3*lda:3*lda+k]
	b = b[:k*trPanel]
	for t := range k {
		bt := (*[trPanel]float32)(b[t*trPanel:])
		x0, x1, x2, x3 := a0[t], a1[t], a2[t], a3[t]
		for j, v := range bt {
			acc[0][j] += x0 * v
			acc[1][j] += x1 * v
			acc[2][j] += x2 * v
			acc[3][j] += x3 * v
		}
	}
	for r := range trRows {
		copy(c[r*ldc:r*ldc+trPanel], acc[r][:])
	}
}

// trAxpyGo is the portable twin of trAxpy: y += alpha * x (len(y) >= len(x)).
func trAxpyGo(alpha float32, x, y []float32) {
	y = y[:len(x)]
	for i, v := range x {
		y[i] += alpha * v
	}
}
