package sgns

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"convtag/model/internal/kernel"
	"convtag/model/token"
	"convtag/model/vectors"
)

// Defaults. Window 5, 5 negatives, the 0.75 power of the noise
// distribution and the sub-sampling threshold 1e-4 (the paper tried 1e-5
// on its largest corpus; the word2vec tool defaults to 1e-3, gensim to
// 1e-3) follow Mikolov et al. 2013; the starting learning rate 0.025,
// minimum count 5, dimension 100 and 5 epochs are the word2vec tool's
// defaults for skip-gram.
const (
	DefaultDim      = 100
	DefaultWindow   = 5
	DefaultNegative = 5
	DefaultMinCount = 5
	DefaultSample   = 1e-4
	DefaultAlpha    = 0.025
	DefaultEpochs   = 5
)

// Limits.
const (
	// MaxRecordTokens is the most tokens taken from one record; the rest
	// of a longer record is ignored. It replaces the tokenizer's own cap,
	// which is sized for tagging.
	MaxRecordTokens = 100_000
	// maxVocab is the number of distinct words counted before the
	// rarest are pruned, as the word2vec tool does when its table is 70%
	// full (0.7 × 30M): each prune drops the words seen at most k times,
	// k = 1, 2, …, so a word first seen late may be undercounted.
	maxVocab = 21_000_000
	// batchBytes is the text handed to a worker at a time.
	batchBytes = 64 << 10
	// minAlphaFraction floors the decayed learning rate, as the word2vec
	// tool does (starting_alpha × 0.0001).
	minAlphaFraction = 1e-4
)

// Corpus is the training text.
type Corpus interface {
	// Scan calls fn with each record's text, in order, from the start of
	// the corpus; text is valid only during the call. Scan returns the
	// first error fn returns, or its own. Train calls Scan once to count
	// words and once per epoch; every call must give the same texts.
	Scan(fn func(text []byte) error) error
}

// Texts is a corpus held in memory, one string per record.
type Texts []string

// Scan calls fn with each text.
func (t Texts) Scan(fn func(text []byte) error) error {
	for _, s := range t {
		if err := fn([]byte(s)); err != nil {
			return err
		}
	}
	return nil
}

// Options control Train. A zero field means its default.
type Options struct {
	Dim      int     // vector size (DefaultDim)
	Window   int     // largest distance to a context word (DefaultWindow)
	Negative int     // noise words per context word (DefaultNegative)
	MinCount int     // words seen fewer times are left out (DefaultMinCount)
	Sample   float64 // sub-sampling threshold t (DefaultSample); negative turns sub-sampling off
	Alpha    float64 // starting learning rate (DefaultAlpha)
	Epochs   int     // passes over the corpus (DefaultEpochs)
	Seed     uint64  // the same seed, corpus and Jobs == 1 give identical vectors
	// Jobs is the number of goroutines updating the vectors (0 means
	// GOMAXPROCS). With more than one they update shared rows without
	// locks (Hogwild; Recht, Ré, Wright and Niu, 2011), as the word2vec
	// tool does, and the result depends on scheduling.
	Jobs int
	// Tokenizer cuts the text; its MaxTokens is replaced by
	// MaxRecordTokens.
	Tokenizer token.Settings
	// Progress, when set, is called about every ProgressEvery (default one
	// second) and once at the end of each phase, from one goroutine at a
	// time.
	Progress      func(Progress)
	ProgressEvery time.Duration
}

func (o *Options) defaults() error {
	def := func(v *int, d int) {
		if *v == 0 {
			*v = d
		}
	}
	def(&o.Dim, DefaultDim)
	def(&o.Window, DefaultWindow)
	def(&o.Negative, DefaultNegative)
	def(&o.MinCount, DefaultMinCount)
	def(&o.Epochs, DefaultEpochs)
	def(&o.Jobs, runtime.GOMAXPROCS(0))
	if o.Sample == 0 {
		o.Sample = DefaultSample
	}
	if o.Alpha == 0 {
		o.Alpha = DefaultAlpha
	}
	if o.ProgressEvery <= 0 {
		o.ProgressEvery = time.Second
	}
	switch {
	case o.Dim < 1 || o.Dim > vectors.MaxDim:
		return fmt.Errorf("sgns: dimension %d out of range 1..%d", o.Dim, vectors.MaxDim)
	case o.Window < 1 || o.Window > 1000:
		return fmt.Errorf("sgns: window %d out of range 1..1000", o.Window)
	case o.Negative < 1 || o.Negative > 1000:
		return fmt.Errorf("sgns: negative samples %d out of range 1..1000", o.Negative)
	case o.MinCount < 1:
		return fmt.Errorf("sgns: min count %d is below 1", o.MinCount)
	case o.Epochs < 1 || o.Epochs > 10000:
		return fmt.Errorf("sgns: epochs %d out of range 1..10000", o.Epochs)
	case o.Jobs < 1 || o.Jobs > 1024:
		return fmt.Errorf("sgns: jobs %d out of range 1..1024", o.Jobs)
	case !(o.Alpha > 0 && o.Alpha < 10):
		return fmt.Errorf("sgns: learning rate %v out of range (0, 10)", o.Alpha)
	case math.IsNaN(o.Sample) || o.Sample >= 1:
		return fmt.Errorf("sgns: sub-sampling threshold %v is not below 1", o.Sample)
	}
	return nil
}

// Phases of Train, as Progress reports them.
const (
	PhaseCount = "count"
	PhaseTrain = "train"
)

// Progress is a snapshot of a running Train.
type Progress struct {
	Phase  string // PhaseCount or PhaseTrain
	Epoch  int    // 1-based during training, 0 while counting
	Epochs int
	// Words are the tokens read so far in this phase: while counting all
	// tokens, while training the vocabulary words (before sub-sampling)
	// over all epochs so far.
	Words int64
	// Total is the number of vocabulary words training reads over all
	// epochs; 0 while counting.
	Total   int64
	Alpha   float64 // learning rate now; 0 while counting
	Elapsed time.Duration
	Done    bool // the phase has ended
}

// WordsPerSecond is the phase's mean rate so far.
func (p Progress) WordsPerSecond() float64 {
	if p.Elapsed <= 0 {
		return 0
	}
	return float64(p.Words) / p.Elapsed.Seconds()
}

// Remaining estimates the training time left from the rate so far; 0 when
// unknown or while counting.
func (p Progress) Remaining() time.Duration {
	r := p.WordsPerSecond()
	if p.Total == 0 || r == 0 || p.Words >= p.Total {
		return 0
	}
	return time.Duration(float64(p.Total-p.Words) / r * float64(time.Second))
}

// Result is what Train learnt.
type Result struct {
	// Vectors holds one vector per vocabulary word, most frequent first
	// (ties in byte order): the input ("word") vectors of the model, which
	// is what the word2vec tool writes.
	Vectors *vectors.Set
	Counts  []int64 // each vocabulary word's count, in the same order
	Records int64   // records per pass
	Tokens  int64   // tokens per pass, including words below MinCount
	Words   int64   // tokens of vocabulary words per pass
	Rare    int     // distinct words left out for MinCount (or too long to store)
	// TrainTime is the time spent in the training passes (after counting).
	TrainTime time.Duration
}

// ErrNoVocabulary is returned when no word reaches the minimum count.
var ErrNoVocabulary = errors.New("sgns: no word reaches the minimum count")

// Train learns vectors for the words of c that occur at least MinCount
// times. It stops early with ctx's error when ctx is cancelled.
func Train(ctx context.Context, c Corpus, o Options) (*Result, error) {
	if err := o.defaults(); err != nil {
		return nil, err
	}
	tokSet := o.Tokenizer
	tokSet.MaxTokens = MaxRecordTokens
	tok := token.New(tokSet)

	start := time.Now()
	var counted atomic.Int64
	stop := o.report(func() Progress {
		return Progress{Phase: PhaseCount, Epochs: o.Epochs, Words: counted.Load(), Elapsed: time.Since(start)}
	})
	v, err := countWords(ctx, c, tok, o, &counted)
	stop()
	if err != nil {
		return nil, err
	}
	res := &Result{Records: v.records, Tokens: v.tokens, Rare: v.rare}
	if len(v.words) == 0 {
		return nil, fmt.Errorf("%w of %d (%d tokens in %d records)", ErrNoVocabulary, o.MinCount, v.tokens, v.records)
	}
	res.Counts = v.counts
	for _, n := range v.counts {
		res.Words += n
	}

	t := newTrainer(v, o, res.Words)
	start = time.Now()
	stop = o.report(func() Progress {
		done := t.done.Load()
		return Progress{Phase: PhaseTrain, Epoch: min(int(t.epoch.Load()), o.Epochs), Epochs: o.Epochs,
			Words: done, Total: t.total, Alpha: t.alpha(done), Elapsed: time.Since(start)}
	})
	for e := range o.Epochs {
		t.epoch.Store(int32(e + 1))
		if err := t.run(ctx, c, tok); err != nil {
			stop()
			return nil, err
		}
	}
	stop()
	res.TrainTime = time.Since(start)
	res.Vectors = &vectors.Set{Words: v.words, Dim: o.Dim, Vecs: t.syn0}
	return res, nil
}

// report calls o.Progress with snap() every o.ProgressEvery until the
// returned stop is called, which makes one last call marked Done.
func (o *Options) report(snap func() Progress) (stop func()) {
	if o.Progress == nil {
		return func() {}
	}
	quit := make(chan struct{})
	var wg sync.WaitGroup
	wg.Go(func() {
		tick := time.NewTicker(o.ProgressEvery)
		defer tick.Stop()
		for {
			select {
			case <-quit:
				return
			case <-tick.C:
				o.Progress(snap())
			}
		}
	})
	return func() {
		close(quit)
		wg.Wait()
		p := snap()
		p.Done = true
		o.Progress(p)
	}
}

// batch is a run of records' texts.
type batch struct {
	buf  []byte
	ends []int
}

// pipeline scans c once, cutting its texts into batches that jobs
// goroutines hand to work (each with its own index k). It returns the first
// error of the scan, of work or of ctx.
func pipeline(ctx context.Context, c Corpus, jobs int, work func(k int, b *batch) error) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var (
		workErr error
		once    sync.Once
	)
	full := make(chan *batch, jobs)
	pool := make(chan *batch, 2*jobs+1)
	for range cap(pool) {
		pool <- &batch{buf: make([]byte, 0, batchBytes+4096)}
	}
	var wg sync.WaitGroup
	for k := range jobs {
		wg.Go(func() {
			for b := range full {
				if ctx.Err() == nil {
					if err := work(k, b); err != nil {
						once.Do(func() { workErr = err; cancel() })
					}
				}
				pool <- b
			}
		})
	}
	var cur *batch
	send := func() error {
		select {
		case full <- cur:
			cur = nil
			return nil
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	err := c.Scan(func(text []byte) error {
		if cur == nil {
			select {
			case cur = <-pool:
				cur.buf, cur.ends = cur.buf[:0], cur.ends[:0]
			case <-ctx.Done():
				return ctx.Err()
			}
		}
		cur.buf = append(cur.buf, text...)
		cur.ends = append(cur.ends, len(cur.buf))
		if len(cur.buf) >= batchBytes {
			return send()
		}
		return nil
	})
	if err == nil && cur != nil {
		err = send()
	}
	close(full)
	wg.Wait()
	switch {
	case workErr != nil:
		return workErr
	case err != nil:
		return err
	}
	// A batch skipped after cancellation must not pass for a full pass.
	return ctx.Err()
}

// vocab is the counted vocabulary.
type vocab struct {
	words   []string
	counts  []int64
	index   map[string]int32
	records int64
	tokens  int64
	rare    int
}

// storable says whether a token can be a word of a vector file.
func storable(tok []byte) bool {
	return len(tok) <= vectors.MaxWordBytes && !strings.ContainsAny(string(tok), " \t\r\n")
}

func countWords(ctx context.Context, c Corpus, tok *token.Tokenizer, o Options, counted *atomic.Int64) (*vocab, error) {
	type local struct {
		counts          map[string]int64
		records, tokens int64
		reduce          int64
		ts              token.Tokens
	}
	locals := make([]local, o.Jobs)
	for k := range locals {
		locals[k].counts = map[string]int64{}
		locals[k].reduce = 1
	}
	err := pipeline(ctx, c, o.Jobs, func(k int, b *batch) error {
		l := &locals[k]
		start := 0
		for _, end := range b.ends {
			tok.Tokenize(&l.ts, b.buf[start:end])
			start = end
			for i := range l.ts.Len() {
				t := l.ts.At(i)
				if n, ok := l.counts[string(t)]; ok {
					l.counts[string(t)] = n + 1
				} else if storable(t) {
					l.counts[string(t)] = 1
				}
			}
			l.records++
			l.tokens += int64(l.ts.Len())
			counted.Add(int64(l.ts.Len()))
			if len(l.counts) > maxVocab/o.Jobs {
				deleteRare(l.counts, l.reduce)
				l.reduce++
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	all := locals[0].counts
	v := &vocab{}
	for k := range locals {
		v.records += locals[k].records
		v.tokens += locals[k].tokens
		if k > 0 {
			for w, n := range locals[k].counts {
				all[w] += n
			}
		}
	}
	for w, n := range all {
		if n >= int64(o.MinCount) {
			v.words = append(v.words, w)
		} else {
			v.rare++
		}
	}
	slices.SortFunc(v.words, func(a, b string) int {
		if all[a] != all[b] {
			if all[a] > all[b] {
				return -1
			}
			return 1
		}
		return strings.Compare(a, b)
	})
	v.index = make(map[string]int32, len(v.words))
	v.counts = make([]int64, len(v.words))
	for i, w := range v.words {
		v.index[w] = int32(i)
		v.counts[i] = all[w]
	}
	return v, nil
}

func deleteRare(m map[string]int64, atMost int64) {
	for w, n := range m {
		if n <= atMost {
			delete(m, w)
		}
	}
}

// trainer holds the shared weights of one Train.
type trainer struct {
	o     Options
	v     *vocab
	d     int
	syn0  []float32 // input (word) vectors, [V][d]
	syn1  []float32 // output (context) vectors, [V][d]
	keep  []uint64  // keep a word when a 32-bit random number is below this
	noise alias
	total int64 // vocabulary words over all epochs
	done  atomic.Int64
	epoch atomic.Int32
	// workers persist across epochs so that each keeps its random stream.
	workers []*worker
}

func newTrainer(v *vocab, o Options, words int64) *trainer {
	d := o.Dim
	t := &trainer{o: o, v: v, d: d, total: words * int64(o.Epochs)}
	n := len(v.words)
	// Uniform in [-0.5/d, 0.5/d) for the input vectors and zero for the
	// output vectors: the word2vec tool's initialisation.
	rng := rand.New(rand.NewPCG(o.Seed, 0x73676e73)) // "sgns"
	t.syn0 = make([]float32, n*d)
	for i := range t.syn0 {
		t.syn0[i] = float32((rng.Float64() - 0.5) / float64(d))
	}
	t.syn1 = make([]float32, n*d)
	t.keep = keepThresholds(v.counts, words, o.Sample)
	t.noise = newAlias(noiseWeights(v.counts))
	for k := range o.Jobs {
		t.workers = append(t.workers, &worker{
			t:     t,
			rng:   rand.NewPCG(o.Seed, uint64(k)+1),
			neu1e: make([]float32, d),
		})
	}
	return t
}

// keepThresholds gives each word's probability of being kept by
// sub-sampling, scaled to 2^32. It is the word2vec tool's formula,
//
//	keep(w) = (sqrt(f(w)/t) + 1) · t/f(w),   f(w) = count(w)/words,
//
// not the paper's discard probability 1 − sqrt(t/f(w)) (Mikolov et al.
// 2013, section 2.3), which keeps sqrt(t/f(w)): the tool's variant keeps
// t/f(w) more of each frequent word and never drops a word with
// f(w) ≤ ((1+√5)/2)²·t ≈ 2.618·t. gensim uses the same variant (from
// memory of both sources). t < 0 keeps everything.
func keepThresholds(counts []int64, words int64, t float64) []uint64 {
	keep := make([]uint64, len(counts))
	for i, n := range counts {
		p := 1.0
		if t > 0 {
			f := float64(n) / float64(words)
			p = (math.Sqrt(f/t) + 1) * t / f
		}
		keep[i] = uint64(min(p, 1) * (1 << 32))
	}
	return keep
}

// noiseWeights is the noise distribution of the negative samples: the
// unigram distribution raised to the power 0.75 (Mikolov et al. 2013,
// section 2.2), unnormalised.
func noiseWeights(counts []int64) []float64 {
	w := make([]float64, len(counts))
	for i, n := range counts {
		w[i] = math.Pow(float64(n), 0.75)
	}
	return w
}

// alias samples from a discrete distribution in constant time (Walker's
// alias method, built by Vose's algorithm). It draws from the exact
// distribution, where the word2vec tool fills a table of 10^8 entries.
type alias struct {
	prob  []uint64 // take column i when a 32-bit random number is below prob[i] (≤ 2^32)
	other []int32
}

func newAlias(w []float64) alias {
	n := len(w)
	a := alias{prob: make([]uint64, n), other: make([]int32, n)}
	var sum float64
	for _, x := range w {
		sum += x
	}
	scaled := make([]float64, n)
	var small, large []int32
	for i, x := range w {
		scaled[i] = x * float64(n) / sum
		if scaled[i] < 1 {
			small = append(small, int32(i))
		} else {
			large = append(large, int32(i))
		}
	}
	for len(small) > 0 && len(large) > 0 {
		s, l := small[len(small)-1], large[len(large)-1]
		small = small[:len(small)-1]
		a.prob[s] = uint64(scaled[s] * (1 << 32))
		a.other[s] = l
		scaled[l] -= 1 - scaled[s]
		if scaled[l] < 1 {
			large = large[:len(large)-1]
			small = append(small, l)
		}
	}
	// What is left has probability 1 up to rounding.
	for _, i := range append(small, large...) {
		a.prob[i] = 1 << 32
		a.other[i] = i
	}
	return a
}

func (a *alias) sample(r uint64) int32 {
	col := int32((r >> 32) * uint64(len(a.prob)) >> 32)
	if r&0xffffffff < a.prob[col] {
		return col
	}
	return a.other[col]
}

// alpha is the learning rate after done words: linear decay from o.Alpha
// to 0 over all epochs, floored at minAlphaFraction of the start, as in
// the word2vec tool.
func (t *trainer) alpha(done int64) float64 {
	a := t.o.Alpha * (1 - float64(done)/float64(t.total+1))
	return max(a, t.o.Alpha*minAlphaFraction)
}

func (t *trainer) run(ctx context.Context, c Corpus, tok *token.Tokenizer) error {
	return pipeline(ctx, c, t.o.Jobs, func(k int, b *batch) error {
		t.workers[k].batch(tok, b)
		return nil
	})
}

// worker is one goroutine's scratch and random stream.
type worker struct {
	t     *trainer
	rng   *rand.PCG
	ts    token.Tokens
	ids   []int32
	negs  []int32
	neu1e []float32
}

func (w *worker) batch(tok *token.Tokenizer, b *batch) {
	t := w.t
	start := 0
	for _, end := range b.ends {
		tok.Tokenize(&w.ts, b.buf[start:end])
		start = end
		w.ids = w.ids[:0]
		read := int64(0)
		for i := range w.ts.Len() {
			id, ok := t.v.index[string(w.ts.At(i))]
			if !ok {
				continue
			}
			read++
			if w.rng.Uint64()&0xffffffff >= t.keep[id] {
				continue
			}
			w.ids = append(w.ids, id)
		}
		// The rate for a record is fixed by the words read before it.
		alpha := float32(t.alpha(t.done.Add(read) - read))
		w.sentence(w.ids, alpha)
	}
}

// sentence trains on one record's (sub-sampled) words. For each centre
// word the window shrinks to a uniformly random size in 1..Window, which
// weights near context words more (Mikolov et al. 2013; the word2vec
// tool's "b = next_random % window").
func (w *worker) sentence(ids []int32, alpha float32) {
	t := w.t
	d := t.d
	win := uint64(t.o.Window)
	for i, centre := range ids {
		span := int(win - w.rng.Uint64()%win)
		lo, hi := max(i-span, 0), min(i+span, len(ids)-1)
		for c := lo; c <= hi; c++ {
			if c == i {
				continue
			}
			w.negs = w.negs[:0]
			for range t.o.Negative {
				if n := t.noise.sample(w.rng.Uint64()); n != centre {
					w.negs = append(w.negs, n)
				}
			}
			ctx := int(ids[c])
			step(t.syn1, d, t.syn0[ctx*d:(ctx+1)*d], w.neu1e, centre, w.negs, alpha)
		}
	}
}

// step is one stochastic-gradient step of skip-gram with negative
// sampling for a (context word, centre word) pair: with v the context
// word's input vector l1, v'_c the centre word's output vector and v'_n
// the noise words' output vectors, it ascends
//
//	log σ(v'_c · v) + Σ_n log σ(−v'_n · v)
//
// (Mikolov et al. 2013, equation 4) by alpha. With g = alpha·(label −
// σ(v'·v)), label 1 for the centre word and 0 for noise, each output
// vector moves by g·v and v by Σ g·v' — every gradient taken at the old
// values, as in the word2vec tool (it accumulates v's change in neu1e and
// applies it last). The tool predicts the centre word from each context
// word, the reverse of the paper's wording; over a window the two visit
// the same pairs. neu1e is scratch of length d.
func step(syn1 []float32, d int, l1, neu1e []float32, centre int32, negs []int32, alpha float32) {
	kern := kernel.Active
	clear(neu1e)
	for k := -1; k < len(negs); k++ {
		target, label := centre, float32(1)
		if k >= 0 {
			target, label = negs[k], 0
		}
		l2 := syn1[int(target)*d : (int(target)+1)*d]
		g := (label - sigmoid(kern.Dot(l1, l2))) * alpha
		kern.Axpy(g, l2, neu1e)
		kern.Axpy(g, l1, l2)
	}
	kern.Axpy(1, neu1e, l1)
}

// sigmoid is the logistic function, exact to float32 rounding (the
// word2vec tool reads it from a table and clips at ±6).
func sigmoid(x float32) float32 { return float32(1 / (1 + math.Exp(-float64(x)))) }
