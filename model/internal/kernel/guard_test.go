//go:build unix

package kernel

import (
	"math/rand/v2"
	"testing"
	"unsafe"

	"golang.org/x/sys/unix"
)

// guarded returns n bytes that end where an inaccessible page begins, so
// any read past them faults (and crashes the test binary).
func guarded(t *testing.T, n int) []byte {
	t.Helper()
	page := unix.Getpagesize()
	size := (n + page - 1) / page * page
	mem, err := unix.Mmap(-1, 0, size+page, unix.PROT_READ|unix.PROT_WRITE, unix.MAP_ANON|unix.MAP_PRIVATE)
	if err != nil {
		t.Skipf("mmap: %v", err)
	}
	t.Cleanup(func() { unix.Munmap(mem) })
	if err := unix.Mprotect(mem[size:], unix.PROT_NONE); err != nil {
		t.Skipf("mprotect: %v", err)
	}
	return mem[size-n : size : size]
}

// TestFoldKernelsStayInBounds runs every kernel on tables and biases that
// end at a guard page, with texts that use the last row, for filter counts
// that exercise whole, overlapping and masked chunks.
func TestFoldKernelsStayInBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	for _, k := range All {
		for _, f := range []int{5, 8, 17, 36, 64, 65, 100, 127, 130, 200} {
			w, nr := 5, 9
			tb := guarded(t, nr*w*f*4)
			tab32 := unsafe.Slice((*float32)(unsafe.Pointer(&tb[0])), nr*w*f)
			hb := guarded(t, nr*w*f*2)
			tab16 := unsafe.Slice((*uint16)(unsafe.Pointer(&hb[0])), nr*w*f)
			bb := guarded(t, f*4)
			bias := unsafe.Slice((*float32)(unsafe.Pointer(&bb[0])), f)
			for i := range tab32 {
				tab32[i] = float32(rng.NormFloat64())
				tab16[i] = F32ToF16(tab32[i])
			}
			rows := []int32{int32(nr - 1), 0, int32(nr - 1), 3, int32(nr - 1)}
			mx, win, acc := make([]float32, f), make([]int32, f), make([]float32, f)
			k.FoldF32(tab32, w, f, rows, bias, mx, win, acc)
			k.FoldF16(tab16, w, f, rows, bias, mx, win, acc)
			k.FoldF32(tab32, w, f, rows, bias, mx, nil, acc)
			k.FoldF16(tab16, w, f, rows, bias, mx, nil, acc)
		}
		for _, n := range []int{1, 5, 16, 17, 33, 64, 100} {
			ab := guarded(t, n*4)
			a := unsafe.Slice((*float32)(unsafe.Pointer(&ab[0])), n)
			xb := guarded(t, (3*7+n)*4)
			x := unsafe.Slice((*float32)(unsafe.Pointer(&xb[0])), 3*7+n)
			var out [4]float32
			k.Dot(a, x[3*7:])
			k.Dot4(a, x, 7, &out)
		}
	}
}
