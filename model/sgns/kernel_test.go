package sgns

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// The AVX2 kernels agree with the plain-Go ones (differential test; sums
// in a different order and fused multiply-adds round differently, within
// a few float32 ulps of the magnitudes involved).
func TestKernels(t *testing.T) {
	if !useAVX2 {
		t.Skip("no AVX2+FMA on this CPU")
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for n := range 80 {
		x, y := make([]float32, n), make([]float32, n+3)
		var mag float64
		for i := range x {
			x[i] = float32(rng.NormFloat64())
			y[i] = float32(rng.NormFloat64())
			mag += math.Abs(float64(x[i] * y[i]))
		}
		if got, want := dotAVX2(x, y), dotGeneric(x, y); math.Abs(float64(got-want)) > 1e-5*(mag+1) {
			t.Errorf("n=%d: dotAVX2 %v, dotGeneric %v", n, got, want)
		}
		y1, y2 := append([]float32(nil), y...), append([]float32(nil), y...)
		axpyAVX2(0.37, x, y1)
		axpyGeneric(0.37, x, y2)
		for i := range y1 {
			if math.Abs(float64(y1[i]-y2[i])) > 1e-6*(1+math.Abs(float64(y2[i]))) {
				t.Fatalf("n=%d: axpyAVX2[%d] %v, axpyGeneric %v", n, i, y1[i], y2[i])
			}
		}
		if y1[n] != y[n] || y1[n+2] != y[n+2] {
			t.Fatalf("n=%d: axpyAVX2 wrote past len(x)", n)
		}
	}
}

func BenchmarkKernels(b *testing.B) {
	for _, d := range []int{100, 300} {
		x, y := make([]float32, d), make([]float32, d)
		for i := range x {
			x[i], y[i] = float32(i), 1
		}
		for _, k := range []struct {
			name string
			f    func()
		}{
			{"dotGeneric", func() { dotGeneric(x, y) }},
			{"dotAVX2", func() { dot(x, y) }},
			{"axpyGeneric", func() { axpyGeneric(1e-9, x, y) }},
			{"axpyAVX2", func() { axpy(1e-9, x, y) }},
		} {
			b.Run(fmt.Sprintf("%s/d=%d", k.name, d), func(b *testing.B) {
				b.SetBytes(int64(8 * d))
				b.ReportAllocs()
				for b.Loop() {
					k.f()
				}
			})
		}
	}
}
