//go:build amd64 && !purego

package kernel

import "golang.org/x/sys/cpu"

// The assembly kernels (fold_amd64.s for the forward pass, train_amd64.s
// for training). At start-up the widest vector set the CPU and OS support
// is chosen: AVX-512 (16 floats per register), else AVX2 with FMA and F16C
// (8 floats), else the generic Go code.

var avx512 = &Set{
	Name:     "avx512",
	FoldF32:  foldAVX512F32,
	FoldF16:  foldAVX512F16,
	Dot:      dotAVX512Go,
	Dot4:     dot4AVX512Go,
	Axpy:     axpyAVX512Go,
	Conv:     convAVX2Go,
	Conv2:    conv2AVX512Go,
	Adadelta: adadeltaAVX2Go,
}

var avx2 = &Set{
	Name:     "avx2",
	FoldF32:  foldAVX2F32,
	FoldF16:  foldAVX2F16,
	Dot:      dotAVX2Go,
	Dot4:     dot4AVX2Go,
	Axpy:     axpyAVX2Go,
	Conv:     convAVX2Go,
	Conv2:    conv2AVX2Go,
	Adadelta: adadeltaAVX2Go,
}

var (
	hasAVX2   = cpu.X86.HasAVX2 && cpu.X86.HasFMA && cpu.X86.HasF16C
	hasAVX512 = hasAVX2 && cpu.X86.HasAVX512F
)

func init() {
	if hasAVX2 {
		All = append(All, avx2)
		Active = avx2
		HWF16 = &F16Hardware{ToF16: cvtPS2PH, ToF32: cvtPH2PS}
	}
	if hasAVX512 {
		All = append(All, avx512)
		Active = avx512
	}
}

//go:noescape
func foldF32AVX512x8(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF16AVX512x8(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF32AVX512x4(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF32AVX512x1(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF16AVX512x4(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF16AVX512x1(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF32AVX2x4(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF32AVX2x1(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF16AVX2x4(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func foldF16AVX2x1(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)

//go:noescape
func dotAVX512(a, b *float32, n int) float32

//go:noescape
func dot4AVX512(a, x *float32, stride, n int, out *[4]float32)

//go:noescape
func dotAVX2(a, b *float32, n int) float32

//go:noescape
func dot4AVX2(a, x *float32, stride, n int, out *[4]float32)

//go:noescape
func cvtPS2PH(dst *uint16, src *float32, n int)

//go:noescape
func cvtPH2PS(dst *float32, src *uint16, n int)

func foldAVX512F32(tab []float32, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32) {
	if f < 16 {
		foldAVX2F32(tab, w, f, rows, bias, mx, win, acc)
		return
	}
	checkFoldArgs(len(tab), w, f, rows, bias, mx, win)
	n, rb, tb := len(rows), w*f*4, f*4
	chunkPlan(f, 16, true, func(c, v int, masks uint64) {
		t, r, b, m, wp := &tab[c], &rows[0], &bias[c], &mx[c], winAt(win, c)
		switch v {
		case 8:
			foldF32AVX512x8(t, r, n, w, rb, tb, b, m, wp, masks, pfAt(c))
		case 4:
			foldF32AVX512x4(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		default:
			foldF32AVX512x1(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		}
	})
}

func foldAVX512F16(tab []uint16, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32) {
	if f < 16 {
		foldAVX2F16(tab, w, f, rows, bias, mx, win, acc)
		return
	}
	checkFoldArgs(len(tab), w, f, rows, bias, mx, win)
	n, rb, tb := len(rows), w*f*2, f*2
	chunkPlan(f, 16, true, func(c, v int, masks uint64) {
		t, r, b, m, wp := &tab[c], &rows[0], &bias[c], &mx[c], winAt(win, c)
		switch v {
		case 8:
			foldF16AVX512x8(t, r, n, w, rb, tb, b, m, wp, masks, pfAt(c))
		case 4:
			foldF16AVX512x4(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		default:
			foldF16AVX512x1(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		}
	})
}

func foldAVX2F32(tab []float32, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32) {
	if f < 8 {
		foldGenericF32(tab, w, f, rows, bias, mx, win, acc)
		return
	}
	checkFoldArgs(len(tab), w, f, rows, bias, mx, win)
	n, rb, tb := len(rows), w*f*4, f*4
	chunkPlan(f, 8, false, func(c, v int, _ uint64) {
		t, r, b, m, wp := &tab[c], &rows[0], &bias[c], &mx[c], winAt(win, c)
		if v == 4 {
			foldF32AVX2x4(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		} else {
			foldF32AVX2x1(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		}
	})
}

func foldAVX2F16(tab []uint16, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32) {
	if f < 8 {
		foldGenericF16(tab, w, f, rows, bias, mx, win, acc)
		return
	}
	checkFoldArgs(len(tab), w, f, rows, bias, mx, win)
	n, rb, tb := len(rows), w*f*2, f*2
	chunkPlan(f, 8, false, func(c, v int, _ uint64) {
		t, r, b, m, wp := &tab[c], &rows[0], &bias[c], &mx[c], winAt(win, c)
		if v == 4 {
			foldF16AVX2x4(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		} else {
			foldF16AVX2x1(t, r, n, w, rb, tb, b, m, wp, 0, pfAt(c))
		}
	})
}

// pfAt is the prefetch distance for the chunk at column c: only the first
// chunk prefetches, since later chunks find the rows in cache.
func pfAt(c int) int {
	if c == 0 {
		return Prefetch
	}
	return 0
}

// winAt is &win[c], or nil when winners are not tracked.
func winAt(win []int32, c int) *int32 {
	if win == nil {
		return nil
	}
	return &win[c]
}

// checkFoldArgs guards the assembly's memory accesses: the slices must be
// long enough for f columns and the table for whole rows. Row ids are
// checked too: the assembly trusts them.
func checkFoldArgs(tabLen, w, f int, rows []int32, bias, mx []float32, win []int32) {
	if len(rows) == 0 || w < 1 || len(bias) < f || len(mx) < f || win != nil && len(win) < f || tabLen%(w*f) != 0 {
		panic("kernel: bad fold kernel arguments")
	}
	nr := uint32(tabLen / (w * f))
	for _, r := range rows {
		if uint32(r) >= nr {
			panic("kernel: fold kernel row out of range")
		}
	}
}

func dotAVX512Go(a, b []float32) float32 {
	if len(a) == 0 {
		return 0
	}
	b = b[:len(a)]
	return dotAVX512(&a[0], &b[0], len(a))
}

func dot4AVX512Go(a, x []float32, stride int, out *[4]float32) {
	if len(a) == 0 {
		*out = [4]float32{}
		return
	}
	_ = x[3*stride+len(a)-1]
	dot4AVX512(&a[0], &x[0], stride, len(a), out)
}

func dotAVX2Go(a, b []float32) float32 {
	if len(a) == 0 {
		return 0
	}
	b = b[:len(a)]
	return dotAVX2(&a[0], &b[0], len(a))
}

func dot4AVX2Go(a, x []float32, stride int, out *[4]float32) {
	if len(a) == 0 {
		*out = [4]float32{}
		return
	}
	_ = x[3*stride+len(a)-1]
	dot4AVX2(&a[0], &x[0], stride, len(a), out)
}

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

func convAVX2Go(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	if k == 0 {
		convGeneric(a, lda, b, k, c, ldc)
		return
	}
	// Bounds the assembly relies on.
	_ = a[(ConvRows-1)*lda+k-1]
	_ = b[k*ConvPanel-1]
	_ = c[(ConvRows-1)*ldc+ConvPanel-1]
	trConvAVX2(&a[0], lda, &b[0], k, &c[0], ldc)
}

func conv2AVX2Go(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	convAVX2Go(a, lda, b[:k*ConvPanel], k, c, ldc)
	convAVX2Go(a, lda, b[k*ConvPanel:], k, c[ConvPanel:], ldc)
}

func conv2AVX512Go(a []float32, lda int, b []float32, k int, c []float32, ldc int) {
	if k == 0 {
		conv2AVX2Go(a, lda, b, k, c, ldc)
		return
	}
	_ = a[(ConvRows-1)*lda+k-1]
	_ = b[2*k*ConvPanel-1]
	_ = c[(ConvRows-1)*ldc+2*ConvPanel-1]
	trConv2AVX512(&a[0], lda, &b[0], k, &c[0], ldc)
}

// axpyAVX2Go runs eight lanes at a time and the tail in Go. Each element
// is one rounding of alpha*x+y either way except in the Go tail, which
// the AVX-512 set shares, so the two vector sets agree bit for bit.
func axpyAVX2Go(alpha float32, x, y []float32) {
	n := len(x)
	if n < 8 {
		axpyGeneric(alpha, x, y)
		return
	}
	y = y[:n]
	m := n &^ 7
	trAxpyAVX2(alpha, &x[0], &y[0], m)
	if m < n {
		axpyGeneric(alpha, x[m:], y[m:])
	}
}

func axpyAVX512Go(alpha float32, x, y []float32) {
	n := len(x)
	if n < 16 {
		axpyAVX2Go(alpha, x, y)
		return
	}
	y = y[:n]
	m := n &^ 15
	trAxpyAVX512(alpha, &x[0], &y[0], m)
	if m < n {
		axpyAVX2Go(alpha, x[m:], y[m:])
	}
}

func adadeltaAVX2Go(lr float32, w, g, sq, acc []float32) {
	n := len(g)
	if n < 8 {
		adadeltaGeneric(lr, w, g, sq, acc)
		return
	}
	w, sq, acc = w[:n], sq[:n], acc[:n]
	m := n &^ 7
	adadeltaAVX2(lr, &w[0], &g[0], &sq[0], &acc[0], m)
	if m < n {
		adadeltaGeneric(lr, w[m:], g[m:], sq[m:], acc[m:])
	}
}
