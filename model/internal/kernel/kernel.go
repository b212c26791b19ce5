package kernel

// Set is one implementation of every kernel. All the sets usable on this
// CPU and build are in All; Active is the one callers use.
type Set struct {
	// Name is "generic", "avx2" or "avx512".
	Name string

	// FoldF32 runs one width's folded convolution over rows (len >= 1,
	// every entry a valid row of tab) with max-over-time pooling:
	//
	//	pre[p][c] = bias[c] + T[rows[p]][0][c] + ... + T[rows[p+k]][k][c]   for k < w, p+k < n
	//	mx[c]     = max(0, max_p pre[p][c]); win[c] = the first p reaching mx[c], or -1 if mx[c] == 0
	//
	// for every filter c < f, where T is tab laid out [rows][w][f]. The taps
	// are added to the bias in order k = 0, 1, ..., in float32, so every
	// implementation gives bit-identical results. With win nil the winners
	// are not tracked, which saves work when no one asks for them; mx is
	// the same either way. acc is scratch of at least f values
	// (implementations may ignore it).
	FoldF32 func(tab []float32, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32)
	// FoldF16 is FoldF32 for a table of IEEE half-precision values; each
	// is widened to float32 exactly before it is added.
	FoldF16 func(tab []uint16, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32)

	// Dot returns the dot product of a and b[:len(a)].
	Dot func(a, b []float32) float32
	// Dot4 sets out[i] to the dot product of a and
	// x[i*stride : i*stride+len(a)] for i < 4.
	Dot4 func(a, x []float32, stride int, out *[4]float32)
	// Axpy sets y += alpha * x for the first len(x) elements of y. The
	// vector sets fuse each multiply-add, so they differ from the generic
	// one in the last bit, and agree with each other bit for bit.
	Axpy func(alpha float32, x, y []float32)

	// Conv computes ConvRows windows times one panel of ConvPanel filters:
	// for r < ConvRows and c < ConvPanel
	//
	//	c[r*ldc + c] = sum_{t<k} a[r*lda + t] * b[t*ConvPanel + c]
	//
	// a's rows may overlap (lda < k): window r of a text starts lda floats
	// after window r-1.
	Conv func(a []float32, lda int, b []float32, k int, c []float32, ldc int)
	// Conv2 is Conv for two panels at once: b holds 2*k*ConvPanel floats
	// (panel q, then q+1) and c gets 2*ConvPanel outputs per row. The
	// results are those of two Conv calls, bit for bit.
	Conv2 func(a []float32, lda int, b []float32, k int, c []float32, ldc int)

	// Adadelta is one Adadelta step (AdadeltaRho, AdadeltaEps) for the
	// len(g) elements of w, with the running means sq and acc. Every set
	// gives the same bits.
	Adadelta func(lr float32, w, g, sq, acc []float32)
}

// ConvPanel is the number of filters Conv computes at once; ConvRows the
// number of windows.
const (
	ConvPanel = 16
	ConvRows  = 4
)

// AdadeltaRho and AdadeltaEps are the decay and the guard of Set.Adadelta.
const (
	AdadeltaRho = 0.95
	AdadeltaEps = 1e-6
)

// Generic is the plain-Go set, compiled on every architecture: elsewhere
// it is the only one, and on amd64 it is the reference the assembly is
// tested against.
var Generic = &Set{
	Name:     "generic",
	FoldF32:  foldGenericF32,
	FoldF16:  foldGenericF16,
	Dot:      dotGeneric,
	Dot4:     dot4Generic,
	Axpy:     axpyGeneric,
	Conv:     convGeneric,
	Conv2:    conv2Generic,
	Adadelta: adadeltaGeneric,
}

// Active is the set callers use: the fastest this CPU and build support,
// chosen once at start-up (kernel_amd64.go). Build with -tags purego for
// Generic everywhere.
var Active = Generic

// All lists every set usable on this CPU and build, Generic first; tests
// compare them.
var All = []*Set{Generic}

// Prefetch is how many positions ahead of its window an assembly fold
// kernel prefetches a row. Measured on the development machine (AVX-512,
// Zipf-distributed rows of a 50,000-word table, A/B interleaved): 8 took
// about 10% off the F32 pass and 35-40% off the F16 pass; 16 was no better
// than 8. Benchmarks set it to 0 to measure the difference; the generic
// set ignores it.
var Prefetch = 8
