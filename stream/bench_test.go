package stream

import (
	"context"
	"io"
	"strings"
	"testing"
)

// benchBlock is about 1 MiB of invented records.
var benchBlock = func() []byte {
	var b strings.Builder
	for b.Len() < 1<<20 {
		b.WriteString(`{"id":12345,"user":"tamsin","ts":"2031-04-01T08:15:00Z","text":"is the morning ferry to Skerrow still running in this fog"}` + "\n")
	}
	return []byte(b.String())
}()

func BenchmarkSplitLines(b *testing.B) {
	b.SetBytes(int64(len(benchBlock)))
	b.ReportAllocs()
	n := 0
	for b.Loop() {
		for i := 0; i < len(benchBlock); {
			_, _, i = nextLine(benchBlock, i)
			n++
		}
	}
}

func BenchmarkValidObject(b *testing.B) {
	rec, _, _ := nextLine(benchBlock, 0)
	var s scanner
	b.SetBytes(int64(len(rec)))
	b.ReportAllocs()
	for b.Loop() {
		s.validObject(rec)
	}
}

func BenchmarkFindPath(b *testing.B) {
	rec, _, _ := nextLine(benchBlock, 0)
	path := []string{"text"}
	b.SetBytes(int64(len(rec)))
	b.ReportAllocs()
	for b.Loop() {
		findPath(rec, 0, path, nil)
	}
}

func BenchmarkSplice(b *testing.B) {
	rec, _, _ := nextLine(benchBlock, 0)
	var s scanner
	s.validObject(rec)
	var sp splicer
	dst := make([]byte, 0, 1024)
	b.SetBytes(int64(len(rec)))
	b.ReportAllocs()
	for b.Loop() {
		dst = sp.splice(dst[:0], rec, s.members, testFields)
	}
}

// BenchmarkReorder puts blocks through the ring in a scrambled order.
func BenchmarkReorder(b *testing.B) {
	const window = 8
	r := newReorder(window)
	blocks := make([]*block, window)
	for i := range blocks {
		blocks[i] = &block{}
	}
	order := []int{3, 1, 0, 2, 7, 5, 4, 6}
	seq := uint64(0)
	b.ReportAllocs()
	for b.Loop() {
		for _, k := range order {
			blocks[k].seq = seq + uint64(k)
			r.put(blocks[k])
		}
		for r.pop() != nil {
		}
		seq += window
	}
}

// nullTagger scores nothing, to measure the pipeline alone.
type nullTagger struct{}

func (nullTagger) Labels() []string  { return []string{"a", "b"} }
func (nullTagger) NewScorer() Scorer { return &nullScorer{p: []float32{0.25, 0.75}} }

type nullScorer struct{ p []float32 }

func (s *nullScorer) Score([]byte) []float32 { return s.p }

// BenchmarkPipeline runs JSON records through Run with a tagger that costs
// nothing: what the stream adds on top of the model, per byte.
func BenchmarkPipeline(b *testing.B) {
	for _, jobs := range []int{1, 2} {
		b.Run("j"+string(rune('0'+jobs)), func(b *testing.B) {
			in := strings.Repeat(string(benchBlock), 8)
			b.SetBytes(int64(len(in)))
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Run(context.Background(), Options{Tagger: nullTagger{}, Jobs: jobs}, nil, strings.NewReader(in), io.Discard); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkWorker tags one block of JSON records on this goroutine: the
// worker's per-record path (split, find the text, score, splice) without
// the pipeline's goroutines around it.
func BenchmarkWorker(b *testing.B) {
	cfg, err := newConfig(Options{Tagger: nullTagger{}})
	if err != nil {
		b.Fatal(err)
	}
	w := newWorker(cfg)
	blk := &block{in: benchBlock, tagger: newTaggerState(nullTagger{}, cfg)}
	b.SetBytes(int64(len(benchBlock)))
	b.ReportAllocs()
	for b.Loop() {
		blk.out, blk.lines, blk.n = blk.out[:0], 0, counts{}
		w.process(blk)
	}
}
