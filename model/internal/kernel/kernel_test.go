package kernel

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// The assembly kernels against the plain-Go twin (differential tests, as
// fast compression libraries test their fast paths). The fold kernels add
// the same float32 values in the same order, so they must agree bit for
// bit, winners included.

// randomFoldCase builds a table of nr rows for one width, and a text.
type fwFoldCase struct {
	w, f, nr int
	t32      []float32
	t16      []uint16
	bias     []float32
	rows     []int32
}

func fwNewFoldCase(rng *rand.Rand, w, f, nr, n int, coarse bool) fwFoldCase {
	c := fwFoldCase{w: w, f: f, nr: nr, t32: make([]float32, nr*w*f), bias: make([]float32, f), rows: make([]int32, n)}
	for i := range c.t32 {
		if coarse {
			// Few distinct values: many ties between positions.
			c.t32[i] = float32(rng.IntN(5)-2) * 0.5
		} else {
			c.t32[i] = float32(rng.NormFloat64())
		}
	}
	for i := range c.bias {
		// Negative biases leave some filters at 0 everywhere (winner -1).
		c.bias[i] = float32(rng.NormFloat64()*2 - 1)
		if coarse {
			c.bias[i] = float32(rng.IntN(5)-3) * 0.5
		}
	}
	c.t16 = make([]uint16, len(c.t32))
	for i, v := range c.t32 {
		c.t16[i] = F32ToF16(v)
	}
	for i := range c.rows {
		c.rows[i] = int32(rng.IntN(nr))
	}
	return c
}

func TestFoldKernelsMatchGeneric(t *testing.T) {
	if len(All) == 1 {
		t.Skip("no assembly kernels on this CPU or build")
	}
	rng := rand.New(rand.NewPCG(1, 2))
	filters := []int{1, 3, 7, 8, 9, 15, 16, 17, 24, 31, 32, 33, 47, 48, 63, 64, 65, 80, 100, 127, 128, 130, 300}
	for _, k := range All[1:] {
		t.Run(k.Name, func(t *testing.T) {
			for trial := range 400 {
				f := filters[trial%len(filters)]
				w := 1 + rng.IntN(6)
				n := 1 + rng.IntN(60)
				c := fwNewFoldCase(rng, w, f, 1+rng.IntN(40), n, trial%3 == 0)
				acc := make([]float32, f)
				for _, half := range []bool{false, true} {
					wantMx, wantWin := make([]float32, f), make([]int32, f)
					gotMx, gotWin := make([]float32, f+1), make([]int32, f+1)
					gotMx[f], gotWin[f] = 42, 42 // must not be written
					if half {
						foldGenericF16(c.t16, w, f, c.rows, c.bias, wantMx, wantWin, acc)
						k.FoldF16(c.t16, w, f, c.rows, c.bias, gotMx[:f], gotWin[:f], acc)
					} else {
						foldGenericF32(c.t32, w, f, c.rows, c.bias, wantMx, wantWin, acc)
						k.FoldF32(c.t32, w, f, c.rows, c.bias, gotMx[:f], gotWin[:f], acc)
					}
					if gotMx[f] != 42 || gotWin[f] != 42 {
						t.Fatalf("w=%d f=%d n=%d half=%v: wrote past the last filter", w, f, n, half)
					}
					// Without winners: the same maxima, and win untouched.
					noMx := make([]float32, f+1)
					noMx[f] = 42
					if half {
						k.FoldF16(c.t16, w, f, c.rows, c.bias, noMx[:f], nil, acc)
					} else {
						k.FoldF32(c.t32, w, f, c.rows, c.bias, noMx[:f], nil, acc)
					}
					if noMx[f] != 42 {
						t.Fatalf("w=%d f=%d n=%d half=%v: wrote past the last filter without winners", w, f, n, half)
					}
					for j := range f {
						if math.Float32bits(noMx[j]) != math.Float32bits(wantMx[j]) {
							t.Fatalf("w=%d f=%d n=%d half=%v filter %d: without winners %v, generic %v", w, f, n, half, j, noMx[j], wantMx[j])
						}
					}
					for j := range f {
						if math.Float32bits(gotMx[j]) != math.Float32bits(wantMx[j]) || gotWin[j] != wantWin[j] {
							t.Fatalf("w=%d f=%d n=%d half=%v filter %d: got %v@%d, generic %v@%d",
								w, f, n, half, j, gotMx[j], gotWin[j], wantMx[j], wantWin[j])
						}
					}
				}
			}
		})
	}
}

// TestFoldGenericDefinition checks the generic kernel itself against the
// definition, written out naively in float64.
func TestFoldGenericDefinition(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := range 200 {
		w, f, n := 1+rng.IntN(6), 1+rng.IntN(40), 1+rng.IntN(60)
		c := fwNewFoldCase(rng, w, f, 1+rng.IntN(30), n, false)
		mx, win, acc := make([]float32, f), make([]int32, f), make([]float32, f)
		foldGenericF32(c.t32, w, f, c.rows, c.bias, mx, win, acc)
		for j := range f {
			best, at := 0.0, -1
			for p := range n {
				s := float64(c.bias[j])
				for k := 0; k < w && p+k < n; k++ {
					s += float64(c.t32[(int(c.rows[p+k])*w+k)*f+j])
				}
				if s > best+1e-5 {
					best, at = s, p
				}
			}
			if math.Abs(float64(mx[j])-best) > 1e-5 {
				t.Fatalf("trial %d filter %d: max %v, definition %v", trial, j, mx[j], best)
			}
			if at < 0 && win[j] != -1 || at >= 0 && win[j] < 0 {
				t.Fatalf("trial %d filter %d: winner %d, definition %d", trial, j, win[j], at)
			}
		}
	}
}

func TestDotKernels(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, k := range All {
		t.Run(k.Name, func(t *testing.T) {
			for n := range 300 {
				a := fwRandFloats(rng, n)
				const stride = 307
				x := fwRandFloats(rng, 3*stride+n)
				var out [4]float32
				k.Dot4(a, x, stride, &out)
				for i := range 4 {
					want, scale := fwDot64(a, x[i*stride:i*stride+n])
					if d := math.Abs(float64(out[i]) - want); d > 1e-6*scale+1e-30 {
						t.Fatalf("dot4 n=%d row %d: %v, float64 %v", n, i, out[i], want)
					}
				}
				got := k.Dot(a, x)
				want, scale := fwDot64(a, x[:n])
				if d := math.Abs(float64(got) - want); d > 1e-6*scale+1e-30 {
					t.Fatalf("dot n=%d: %v, float64 %v", n, got, want)
				}
			}
		})
	}
}

// fwDot64 returns the float64 dot product and the sum of |a_i b_i|, which
// bounds the rounding error of any float32 summation order (times n·eps).
func fwDot64(a, b []float32) (float64, float64) {
	var s, m float64
	for i := range a {
		s += float64(a[i]) * float64(b[i])
		m += math.Abs(float64(a[i]) * float64(b[i]))
	}
	return s, m
}

func fwRandFloats(rng *rand.Rand, n int) []float32 {
	x := make([]float32, n)
	for i := range x {
		x[i] = float32(rng.NormFloat64())
	}
	return x
}

// Known binary16 encodings, from the IEEE 754-2008 binary16 format (1 sign,
// 5 exponent bits with bias 15, 10 fraction bits); values from memory of
// the format's standard examples, each re-derivable by hand.
func TestF16Known(t *testing.T) {
	cases := []struct {
		f float32
		h uint16
	}{
		{0, 0x0000},
		{float32(math.Copysign(0, -1)), 0x8000},
		{1, 0x3c00},
		{-2, 0xc000},
		{0.5, 0x3800},
		{65504, 0x7bff},                          // largest finite
		{65519.99, 0x7bff},                       // below the rounding point to infinity
		{65520, 0x7c00},                          // ties to even: rounds up to infinity
		{float32(math.Ldexp(1, -14)), 0x0400},    // smallest normal
		{float32(math.Ldexp(1, -24)), 0x0001},    // smallest subnormal
		{float32(math.Ldexp(1, -25)), 0x0000},    // half of it: tie, to even (zero)
		{float32(math.Ldexp(1.5, -25)), 0x0001},  // above the tie
		{float32(math.Ldexp(1023, -24)), 0x03ff}, // largest subnormal
		{1.0 / 3, 0x3555},                        // 0.333251953125
		{1 + 1.0/2048, 0x3c00},                   // tie between 1 and 1+2^-10: to even
		{1 + 3.0/2048, 0x3c02},                   // tie between 1+2^-10 and 1+2^-9: to even
		{float32(math.Inf(1)), 0x7c00},
		{float32(math.Inf(-1)), 0xfc00},
		{1e6, 0x7c00},
	}
	for _, c := range cases {
		if got := F32ToF16(c.f); got != c.h {
			t.Errorf("F32ToF16(%v) = %#04x, want %#04x", c.f, got, c.h)
		}
		if !math.IsInf(float64(c.f), 0) && c.h&0x7c00 != 0x7c00 {
			back := F16ToF32(c.h)
			if got := F32ToF16(back); got != c.h {
				t.Errorf("round trip of %#04x gives %#04x", c.h, got)
			}
		}
	}
	if h := F32ToF16(float32(math.NaN())); h&0x7c00 != 0x7c00 || h&0x3ff == 0 {
		t.Errorf("NaN converts to %#04x, not a NaN", h)
	}
}

// TestF16Hardware checks both conversions against the CPU's F16C
// instructions (VCVTPH2PS, and VCVTPS2PH with round-to-nearest-even): all
// 65,536 halves, every float32 near a half rounding point, and a spread of
// other bit patterns.
func TestF16Hardware(t *testing.T) {
	if HWF16 == nil {
		t.Skip("no F16C on this CPU or build")
	}
	hs := make([]uint16, 1<<16)
	for i := range hs {
		hs[i] = uint16(i)
	}
	fs := make([]float32, len(hs))
	HWF16.ToF32(&fs[0], &hs[0], len(hs))
	for i, h := range hs {
		got := F16ToF32(h)
		if math.IsNaN(float64(fs[i])) {
			if !math.IsNaN(float64(got)) {
				t.Fatalf("F16ToF32(%#04x) = %v, hardware NaN", h, got)
			}
			continue
		}
		if math.Float32bits(got) != math.Float32bits(fs[i]) {
			t.Fatalf("F16ToF32(%#04x) = %v, hardware %v", h, got, fs[i])
		}
	}
	// Float32 inputs: each half's value, the midpoint to the next half and
	// one float32 ulp either side of both, plus a stride through all bit
	// patterns.
	var in []float32
	for i := 0; i < 0x7c00; i++ {
		lo, hi := F16ToF32(uint16(i)), F16ToF32(uint16(i+1))
		mid := float32((float64(lo) + float64(hi)) / 2)
		for _, v := range []float32{lo, mid} {
			b := math.Float32bits(v)
			for _, x := range []uint32{b - 1, b, b + 1} {
				f := math.Float32frombits(x)
				in = append(in, f, -f)
			}
		}
	}
	for b := uint64(0); b < 1<<32; b += 4099 {
		in = append(in, math.Float32frombits(uint32(b)))
	}
	for len(in)%8 != 0 {
		in = append(in, 0)
	}
	want := make([]uint16, len(in))
	HWF16.ToF16(&want[0], &in[0], len(in))
	for i, f := range in {
		got := F32ToF16(f)
		if math.IsNaN(float64(f)) {
			if got&0x7c00 != 0x7c00 || got&0x3ff == 0 {
				t.Fatalf("F32ToF16(NaN %#08x) = %#04x, not a NaN", math.Float32bits(f), got)
			}
			continue
		}
		if got != want[i] {
			t.Fatalf("F32ToF16(%v = %#08x) = %#04x, hardware %#04x", f, math.Float32bits(f), got, want[i])
		}
	}
}

func TestChunkPlanCoversExactly(t *testing.T) {
	for _, vw := range []int{8, 16} {
		for _, wide := range []bool{false, true} {
			for f := vw; f <= 400; f++ {
				seen := make([]int, f)
				passes := 0
				chunkPlan(f, vw, wide, func(c, v int, masks uint64) {
					passes++
					if v == 8 && !wide || v != 1 && v != 4 && v != 8 {
						t.Fatalf("vw=%d wide=%v f=%d: chunk of %d vectors", vw, wide, f, v)
					}
					cols := make([]bool, v*vw)
					for j := range cols {
						cols[j] = j < 4*vw || masks>>(16*(j/vw-4)+j%vw)&1 == 1
					}
					for j, on := range cols {
						if !on {
							continue
						}
						if c+j < 0 || c+j >= f {
							t.Fatalf("vw=%d wide=%v f=%d: chunk at %d reaches column %d", vw, wide, f, c, c+j)
						}
						seen[c+j]++
					}
				})
				if i := slices.Index(seen, 0); i >= 0 {
					t.Fatalf("vw=%d wide=%v f=%d: column %d not covered", vw, wide, f, i)
				}
				if wide && vw == 16 && f == 100 && passes != 1 {
					t.Fatalf("f=100 takes %d passes over the text, want 1", passes)
				}
			}
		}
	}
}
