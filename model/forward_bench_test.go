package model

import (
	"fmt"
	"math/rand/v2"
	"runtime"
	"sync"
	"testing"

	"convtag/model/internal/kernel"
	"convtag/model/token"
)

// Forward-pass benchmarks: one record per op, 20 and 60 tokens, d = 128 and
// 300, 3×100 filters, the direct path and the folded path with F32 and F16
// tables, each with every kernel implementation (generic Go and the
// assembly this CPU supports). Besides ns/op they report ns/token, and
// SetBytes is the memory the pass reads per record (fold-table bytes for the
// folded path, embedding bytes for the direct one), so MB/s is the gather
// bandwidth.
//
// The model has a 50,000-word vocabulary plus 10,000 buckets, and the
// records draw words Zipf-distributed over frequency rank (exponent 1.1;
// word frequencies following Zipf's law with an exponent near 1 is common
// practice in corpus linguistics), with 5% unknown words spread over the
// buckets, cycling through 4,096 records so that the hot rows stay cached
// and the rare ones do not, as on real text.
//
// cpu-ns/token is the benchmark thread's CPU time (Linux), which other
// processes on a shared machine disturb much less than wall time.
//
//	go test ./model -run '^$' -bench Forward -benchtime 2s

const (
	benchWords   = 50000
	benchRecords = 4096
)

type benchSet struct {
	once           sync.Once
	m, f32, f16    *Model
	records        map[int][][]int32
	dim            int
	foldOnce16     sync.Once
	foldOnce32     sync.Once
	buildErr       error
	recordsByToken sync.Map
}

var benchSets = map[int]*benchSet{128: {dim: 128}, 300: {dim: 300}}

func (s *benchSet) model(b *testing.B) *Model {
	s.once.Do(func() {
		cfg := DefaultConfig()
		cfg.Dim = s.dim
		words := make([]string, benchWords)
		for i := range words {
			words[i] = fmt.Sprintf("word%d", i)
		}
		s.m, s.buildErr = New(cfg, token.Settings{}, []string{"arrivals", "delays", "tickets"}, words, 1)
	})
	if s.buildErr != nil {
		b.Fatal(s.buildErr)
	}
	return s.m
}

func (s *benchSet) folded(b *testing.B, half bool) *Model {
	m := s.model(b)
	if half {
		s.foldOnce16.Do(func() { s.f16 = fwFolded(m, true) })
		return s.f16
	}
	s.foldOnce32.Do(func() { s.f32 = fwFolded(m, false) })
	return s.f32
}

func (s *benchSet) recordsOf(m *Model, n int) [][]int32 {
	if r, ok := s.recordsByToken.Load(n); ok {
		return r.([][]int32)
	}
	rng := rand.New(rand.NewPCG(uint64(n), 7))
	zipf := rand.NewZipf(rng, 1.1, 1, benchWords-1)
	recs := make([][]int32, benchRecords)
	for i := range recs {
		r := make([]int32, n)
		for j := range r {
			if rng.IntN(20) == 0 {
				r[j] = int32(1 + benchWords + rng.IntN(m.Config.Buckets))
			} else {
				r[j] = int32(1 + zipf.Uint64())
			}
		}
		recs[i] = r
	}
	s.recordsByToken.Store(n, recs)
	return recs
}

// noPrefetch turns the assembly fold kernels' prefetching off until
// restore is called.
func noPrefetch() (restore func()) {
	old := kernel.Prefetch
	kernel.Prefetch = 0
	return func() { kernel.Prefetch = old }
}

func BenchmarkForward(b *testing.B) {
	for _, d := range []int{128, 300} {
		s := benchSets[d]
		for _, n := range []int{20, 60} {
			for _, path := range []string{"direct", "f32", "f16"} {
				for _, variant := range benchVariants(path) {
					k := variant.k
					b.Run(fmt.Sprintf("d=%d/n=%d/%s/%s", d, n, path, variant.name), func(b *testing.B) {
						if variant.nopf {
							defer noPrefetch()()
						}
						var m *Model
						var perToken int
						switch path {
						case "direct":
							m = s.model(b)
							perToken = d * 4
						case "f32":
							m = s.folded(b, false)
							perToken = m.Config.Taps() * m.Config.Filters * 4
						case "f16":
							m = s.folded(b, true)
							perToken = m.Config.Taps() * m.Config.Filters * 2
						}
						recs := s.recordsOf(m, n)
						p := m.NewPredictor()
						p.k = k
						p.SetDirect(path == "direct")
						b.SetBytes(int64(n * perToken))
						b.ReportAllocs()
						clock := startClocks()
						i := 0
						for b.Loop() {
							p.PredictRows(recs[i%len(recs)])
							i++
						}
						clock.report(b, n)
					})
				}
			}
		}
	}
}

type benchVariant struct {
	name string
	k    *kernel.Set
	nopf bool
}

// benchVariants is every kernel implementation, and for the folded paths
// the fastest one once more without prefetching.
func benchVariants(path string) []benchVariant {
	var vs []benchVariant
	for _, k := range kernel.All {
		vs = append(vs, benchVariant{name: k.Name, k: k})
	}
	if path != "direct" && kernel.Active != kernel.Generic {
		vs = append(vs, benchVariant{name: kernel.Active.Name + "-noprefetch", k: kernel.Active, nopf: true})
	}
	return vs
}

// BenchmarkFoldHot is the folded pass at 60 tokens over only 100 distinct
// words, so the rows it reads stay in the core's caches: the kernel's
// arithmetic cost, against which BenchmarkForward's Zipf-distributed rows
// show what memory adds.
func BenchmarkFoldHot(b *testing.B) {
	s := benchSets[128]
	const n = 60
	rng := rand.New(rand.NewPCG(5, 5))
	recs := make([][]int32, benchRecords)
	for i := range recs {
		recs[i] = make([]int32, n)
		for j := range recs[i] {
			recs[i][j] = int32(1 + rng.IntN(100))
		}
	}
	for _, half := range []bool{false, true} {
		m := s.folded(b, half)
		for _, k := range kernel.All {
			name := "f32/" + k.Name
			if half {
				name = "f16/" + k.Name
			}
			b.Run(name, func(b *testing.B) {
				p := m.NewPredictor()
				p.k = k
				b.ReportAllocs()
				clock := startClocks()
				i := 0
				for b.Loop() {
					p.PredictRows(recs[i%len(recs)])
					i++
				}
				clock.report(b, n)
			})
		}
	}
}

// BenchmarkPredictText is the whole per-record path on ASCII text:
// tokenizing, vocabulary lookup and the folded F16 forward pass.
func BenchmarkPredictText(b *testing.B) {
	s := benchSets[128]
	m := s.folded(b, true)
	rng := rand.New(rand.NewPCG(3, 3))
	zipf := rand.NewZipf(rng, 1.1, 1, benchWords-1)
	texts := make([][]byte, benchRecords)
	total := 0
	for i := range texts {
		var t []byte
		for j := range 20 {
			if j > 0 {
				t = append(t, ' ')
			}
			t = fmt.Appendf(t, "word%d", zipf.Uint64())
		}
		texts[i] = t
		total += len(t)
	}
	p := m.NewPredictor()
	b.SetBytes(int64(total / len(texts)))
	b.ReportAllocs()
	clock := startClocks()
	i := 0
	for b.Loop() {
		p.Predict(texts[i%len(texts)])
		i++
	}
	clock.report(b, 20)
}

// benchClocks reports ns/token (wall) and cpu-ns/token (thread CPU time).
type benchClocks struct{ cpu int64 }

func startClocks() benchClocks {
	runtime.LockOSThread()
	return benchClocks{cpu: threadCPU()}
}

func (c benchClocks) report(b *testing.B, tokens int) {
	end := threadCPU()
	runtime.UnlockOSThread()
	n := float64(b.N * tokens)
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/n, "ns/token")
	if c.cpu >= 0 && end >= 0 {
		b.ReportMetric(float64(end-c.cpu)/n, "cpu-ns/token")
	}
}

// BenchmarkFoldModel is the one-off cost of building the tables.
func BenchmarkFoldModel(b *testing.B) {
	m := benchSets[128].model(b)
	for b.Loop() {
		c := *m
		FoldModel(&c, false)
	}
}
