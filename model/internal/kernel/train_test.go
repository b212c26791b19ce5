package kernel

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TestTrainKernelsMatchGeneric compares every set's training kernels (and
// Axpy, which word-vector training uses too) with the plain-Go ones, on
// overlapping window rows as training uses them. Fused multiply-adds round
// differently from Go's separate ones, so Conv and Axpy agree within a
// rounding tolerance; Conv2 equals two Conv calls and Adadelta the Go
// twin bit for bit, and the vector sets agree with each other bit for bit.
func TestTrainKernelsMatchGeneric(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	fill := func(n int) []float32 {
		s := make([]float32, n)
		for i := range s {
			s[i] = float32(rng.NormFloat64())
		}
		return s
	}
	for _, k := range All {
		for _, tc := range []struct{ d, w int }{{1, 1}, {3, 2}, {8, 3}, {128, 5}, {300, 4}} {
			n := tc.d * tc.w
			a := fill((ConvRows-1)*tc.d + n)
			b := fill(n * ConvPanel)
			ldc := 3 * ConvPanel
			c1, c2 := make([]float32, ConvRows*ldc), make([]float32, ConvRows*ldc)
			k.Conv(a, tc.d, b, n, c1, ldc)
			convGeneric(a, tc.d, b, n, c2, ldc)
			for i := range c1 {
				if d := math.Abs(float64(c1[i] - c2[i])); d > 1e-5*math.Sqrt(float64(n)) {
					t.Fatalf("%s d=%d w=%d: conv[%d] = %g, Go %g", k.Name, tc.d, tc.w, i, c1[i], c2[i])
				}
			}
		}
		// The two-panel kernel must equal two one-panel calls bit for bit,
		// so that training gives the same weights on every vector set.
		for _, tc := range []struct{ d, w int }{{1, 1}, {3, 2}, {8, 3}, {128, 5}, {300, 4}} {
			n := tc.d * tc.w
			a := fill((ConvRows-1)*tc.d + n)
			b := fill(2 * n * ConvPanel)
			ldc := 3 * ConvPanel
			c1, c2 := make([]float32, ConvRows*ldc), make([]float32, ConvRows*ldc)
			k.Conv2(a, tc.d, b, n, c1, ldc)
			k.Conv(a, tc.d, b[:n*ConvPanel], n, c2, ldc)
			k.Conv(a, tc.d, b[n*ConvPanel:], n, c2[ConvPanel:], ldc)
			for i := range c1 {
				if math.Float32bits(c1[i]) != math.Float32bits(c2[i]) {
					t.Fatalf("%s d=%d w=%d: two-panel conv[%d] = %g, one-panel %g", k.Name, tc.d, tc.w, i, c1[i], c2[i])
				}
			}
		}
		// Adadelta: the same bits as the Go twin, over several steps so
		// the running means are not zero.
		for _, n := range []int{1, 7, 8, 9, 33, 640} {
			g := fill(n)
			var st [2][3][]float32 // weights, squared gradients, squared updates
			for v := range st {
				st[v] = [3][]float32{fill(n), make([]float32, n), make([]float32, n)}
				copy(st[v][0], st[0][0])
			}
			for range 3 {
				k.Adadelta(0.9, st[0][0], g, st[0][1], st[0][2])
				adadeltaGeneric(0.9, st[1][0], g, st[1][1], st[1][2])
				for i := range g {
					g[i] = -0.5 * g[i]
				}
			}
			for j := range 3 {
				for i := range n {
					if math.Float32bits(st[0][j][i]) != math.Float32bits(st[1][j][i]) {
						t.Fatalf("%s n=%d: adadelta tensor %d [%d] = %g, Go %g", k.Name, n, j, i, st[0][j][i], st[1][j][i])
					}
				}
			}
		}
		for _, n := range []int{0, 1, 7, 8, 9, 15, 16, 17, 24, 31, 32, 33, 63, 64, 65, 100, 127, 300, 640} {
			x, y := fill(n), fill(n+3)
			y2, y3 := slices.Clone(y), slices.Clone(y)
			k.Axpy(0.7, x, y)
			axpyGeneric(0.7, x, y2)
			for i := range y {
				if math.Abs(float64(y[i]-y2[i])) > 1e-6*(1+math.Abs(float64(y2[i]))) {
					t.Fatalf("%s n=%d: axpy[%d] = %g, Go %g", k.Name, n, i, y[i], y2[i])
				}
			}
			if y[n] != y3[n] || y[n+2] != y3[n+2] {
				t.Fatalf("%s n=%d: axpy wrote past len(x)", k.Name, n)
			}
			if k == Generic {
				continue
			}
			All[1].Axpy(0.7, x, y3)
			for i := range y {
				if math.Float32bits(y[i]) != math.Float32bits(y3[i]) {
					t.Fatalf("n=%d: %s axpy[%d] = %g, %s %g", n, k.Name, i, y[i], All[1].Name, y3[i])
				}
			}
		}
	}
}

// BenchmarkConv is the training convolution kernel of every set, one and
// two panels, at d = 128, width 5 (k = 640).
func BenchmarkConv(b *testing.B) {
	const d, w = 128, 5
	n := d * w
	a := make([]float32, (ConvRows-1)*d+n)
	bb := make([]float32, 2*n*ConvPanel)
	c := make([]float32, ConvRows*2*ConvPanel)
	for i := range a {
		a[i] = float32(i%7) * 0.1
	}
	for i := range bb {
		bb[i] = float32(i%5) * 0.1
	}
	for _, k := range All {
		for _, panels := range []int{1, 2} {
			b.Run(fmt.Sprintf("%s/panels=%d", k.Name, panels), func(b *testing.B) {
				f := k.Conv
				if panels == 2 {
					f = k.Conv2
				}
				bp := bb[:panels*n*ConvPanel]
				b.SetBytes(int64(4 * len(bp)))
				b.ReportAllocs()
				for b.Loop() {
					f(a, d, bp, n, c, 2*ConvPanel)
				}
				b.ReportMetric(float64(2*ConvRows*panels*ConvPanel*n)*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
			})
		}
	}
}

// BenchmarkDotAxpy is Dot and Axpy of every set at the sizes word-vector
// training uses.
func BenchmarkDotAxpy(b *testing.B) {
	for _, d := range []int{100, 300} {
		x, y := make([]float32, d), make([]float32, d)
		for i := range x {
			x[i], y[i] = float32(i), 1
		}
		for _, k := range All {
			b.Run(fmt.Sprintf("dot/%s/d=%d", k.Name, d), func(b *testing.B) {
				b.SetBytes(int64(8 * d))
				b.ReportAllocs()
				for b.Loop() {
					k.Dot(x, y)
				}
			})
			b.Run(fmt.Sprintf("axpy/%s/d=%d", k.Name, d), func(b *testing.B) {
				b.SetBytes(int64(8 * d))
				b.ReportAllocs()
				for b.Loop() {
					k.Axpy(1e-9, x, y)
				}
			})
		}
	}
}
