//go:build !purego

package model

import "golang.org/x/sys/cpu"

// The assembly kernels (kernel_amd64.s). At start-up the widest vector
// set the CPU and OS support is chosen: AVX-512 (16 floats per register),
// else AVX2 with FMA and F16C (8 floats), else the generic Go code. Build
// with -tags purego to use the generic code only.

var avx512Kernels = kernels{
	name:    "avx512",
	foldF32: foldAVX512F32,
	foldF16: foldAVX512F16,
	dot:     dotAVX512Go,
	dot4:    dot4AVX512Go,
}

var avx2Kernels = kernels{
	name:    "avx2",
	foldF32: foldAVX2F32,
	foldF16: foldAVX2F16,
	dot:     dotAVX2Go,
	dot4:    dot4AVX2Go,
}

var (
	hasAVX2   = cpu.X86.HasAVX2 && cpu.X86.HasFMA && cpu.X86.HasF16C
	hasAVX512 = hasAVX2 && cpu.X86.HasAVX512F
)

func init() {
	if hasAVX2 {
		allKernels = append(allKernels, &avx2Kernels)
		activeKernels = &avx2Kernels
		hwF16 = &f16Hardware{toF16: cvtPS2PH, toF32: cvtPH2PS}
	}
	if hasAVX512 {
		allKernels = append(allKernels, &avx512Kernels)
		activeKernels = &avx512Kernels
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

// prefetchDistance is how many positions ahead of its window a fold
// kernel prefetches a row. Measured on the development machine (AVX-512,
// Zipf-distributed rows of a 50,000-word table, A/B interleaved): 8 took
// about 10% off the F32 pass and 35-40% off the F16 pass; 16 was no
// better than 8. Benchmarks set it to 0 to measure the difference.
var prefetchDistance = 8

// pfAt is the prefetch distance for the chunk at column c: only the first
// chunk prefetches, since later chunks find the rows in cache.
func pfAt(c int) int {
	if c == 0 {
		return prefetchDistance
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
		panic("model: bad fold kernel arguments")
	}
	nr := uint32(tabLen / (w * f))
	for _, r := range rows {
		if uint32(r) >= nr {
			panic("model: fold kernel row out of range")
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
