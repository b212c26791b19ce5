package model

import (
	"fmt"
	"math"

	"convtag/model/internal/kernel"
	"convtag/model/linear"
	"convtag/model/token"
)

// Predictor runs the forward pass of one Model. It holds all per-call
// scratch memory, so after the first few calls a prediction allocates
// nothing. A Predictor must not be used by more than one goroutine at a
// time; make one per worker with Model.NewPredictor. The Model itself is
// shared read-only.
//
// Every slice a Predictor returns is owned by it and valid until its next
// Predict or PredictRows call.
type Predictor struct {
	m      *Model
	k      *kernel.Set
	tok    *token.Tokenizer
	toks   token.Tokens
	rows   []int32
	known  int // tokens of the last Predict that are vocabulary words
	direct bool
	last   []int32 // the last folded text, for Winners
	winOK  bool    // win is up to date

	feat   []float32 // pooled features, Config.Features()
	win    []int32   // winning window start per feature, or -1
	hid    []float32 // hidden activations, Config.Hidden
	logits []float32
	probs  []float32
	acc    []float32 // kernel scratch, Filters
	out4   [4]float32

	// The scorer (Model.Scorer unless SetScorer) and, when it uses the
	// linear baseline, its predictor and the mixture's scratch.
	scorer Scorer
	lin    *linear.Predictor
	linP   []float64 // the baseline's probabilities of the last Predict
	mixed  []float32
	mixZ   []float64

	// Direct path only, built on first use.
	wt [][]float32 // per width, the filters as [F][w][d] (tap-major)
	x  []float32   // the text's embedding rows, then zero rows
}

// KernelName names the kernel set this CPU and build run: "avx512",
// "avx2" or "generic" (plain Go).
func KernelName() string { return kernel.Active.Name }

// NewPredictor returns a Predictor for m with its own scratch memory. It
// panics if m.Fold is inconsistent with m's shape, which a loaded or
// folded model never is.
func (m *Model) NewPredictor() *Predictor {
	if err := m.checkFold(); err != nil {
		panic(err)
	}
	cfg := m.Config
	p := &Predictor{
		m:      m,
		k:      kernel.Active,
		tok:    m.Tokenizer(),
		feat:   make([]float32, cfg.Features()),
		win:    make([]int32, cfg.Features()),
		hid:    make([]float32, cfg.Hidden),
		logits: make([]float32, m.Out.Out),
		probs:  make([]float32, m.Out.Out),
		acc:    make([]float32, cfg.Filters),
	}
	limit := m.TokenSettings.Limit()
	p.rows = make([]int32, 0, limit)
	p.last = make([]int32, 0, limit)
	if err := p.SetScorer(m.Scorer); err != nil {
		p.SetScorer(Scorer{}) // Open checked the stored scorer; a built model may hold any
	}
	return p
}

// SetScorer makes Predict score with s (see Scorer); it fails, changing
// nothing, when s needs a baseline the model lacks.
func (p *Predictor) SetScorer(s Scorer) error {
	if err := s.check(p.m); err != nil {
		return err
	}
	p.scorer = s
	if s.weight() > 0 && p.lin == nil {
		p.lin = p.m.Linear.NewPredictor()
		p.mixed = make([]float32, len(p.m.Labels))
		p.mixZ = make([]float64, len(p.m.Labels))
	}
	p.linP = nil
	return nil
}

// Scorer is what Predict scores with.
func (p *Predictor) Scorer() Scorer { return p.scorer }

// NetworkProbs is the network's own probabilities for the last Predict
// (whatever the scorer), valid until the next call.
func (p *Predictor) NetworkProbs() []float32 { return p.probs }

// BaselineProbs is the linear baseline's probabilities for the last
// Predict, or nil when the scorer does not use the baseline.
func (p *Predictor) BaselineProbs() []float64 { return p.linP }

// SetDirect forces the direct path (embedding rows times filters) even when
// m has fold tables. Without fold tables the direct path is always used.
func (p *Predictor) SetDirect(direct bool) { p.direct = direct }

// Predict tokenizes text, looks its tokens up in the vocabulary and returns
// one probability per label: the network's softmax of the logits (for a
// multi-label model, Model.Multi, each logit's sigmoid), or, as the
// Predictor's Scorer says, the linear baseline's probabilities of the same
// tokens or the mixture of both (single-label models only).
func (p *Predictor) Predict(text []byte) []float32 {
	p.tok.Tokenize(&p.toks, text)
	p.rows = p.rows[:0]
	p.known = 0
	words := int32(p.m.Vocab.Len())
	for i := range p.toks.Len() {
		r := p.m.Vocab.Row(p.toks.At(i))
		if r <= words {
			p.known++ // rows 1..V are the vocabulary's words; higher are shared
		}
		p.rows = append(p.rows, r)
	}
	pn := p.PredictRows(p.rows)
	w := p.scorer.weight()
	if w == 0 {
		return pn
	}
	p.linP = p.lin.ProbsOf(&p.toks)
	if w == 1 {
		for c, v := range p.linP {
			p.mixed[c] = float32(v)
		}
	} else {
		Mix(p.mixed, p.mixZ, pn, p.linP, w)
	}
	return p.mixed
}

// PredictRows returns the probabilities for a text given as embedding rows
// (see Model.Emb). An empty rows is one padding token. It panics if a row is
// out of range, which rows from Vocab.Row never are.
func (p *Predictor) PredictRows(rows []int32) []float32 {
	if len(rows) == 0 {
		rows = padOnly[:]
	}
	nr := uint32(p.m.Rows())
	for i, r := range rows {
		if uint32(r) >= nr {
			panic(fmt.Sprintf("model: row %d at position %d out of range 0..%d", r, i, nr-1))
		}
	}
	if p.m.Fold != nil && !p.direct {
		// Winners are found on demand: the tagger never asks, and
		// tracking them costs the kernel two more instructions per
		// vector and position.
		p.last = append(p.last[:0], rows...)
		p.forwardFolded(rows, false)
		p.winOK = false
	} else {
		p.forwardDirect(rows)
		p.winOK = true
	}
	p.dense()
	if p.m.Multi {
		sigmoid(p.probs, p.logits)
	} else {
		softmax(p.probs, p.logits)
	}
	return p.probs
}

var padOnly = [1]int32{0}

// TokenCount is the number of tokens the tokenizer found in the text of the
// last Predict (or Explain) call; 0 means the text had no word, and the
// probabilities are those of a padding-only input. PredictRows does not
// change it.
func (p *Predictor) TokenCount() int { return p.toks.Len() }

// KnownCount is how many of the last Predict call's tokens are words of
// the vocabulary (the rest share the rows for unseen words). Their share,
// KnownCount()/TokenCount(), says how much of a text the model has seen
// the like of.
func (p *Predictor) KnownCount() int { return p.known }

// Logits returns the last prediction's logits, one per label.
func (p *Predictor) Logits() []float32 { return p.logits }

// Features returns the last prediction's pooled feature vector: for each
// width in order, F values max_p ReLU(pre[p][f]).
func (p *Predictor) Features() []float32 { return p.feat }

// Winners returns, for each feature of Features, the position of the first
// token of the window that won its max-over-time pooling: the first
// position whose pre-activation is the maximum. When no window has a
// positive pre-activation the feature is 0 after ReLU, no window
// contributed anything, and the winner is -1, so an explanation never
// credits an n-gram with a feature it did not raise.
//
// On the folded path the winners are computed on the first call after a
// prediction, by a second pass over the text that repeats the same
// additions (so Features is unchanged).
func (p *Predictor) Winners() []int32 {
	if !p.winOK {
		p.forwardFolded(p.last, true)
		p.winOK = true
	}
	return p.win
}

// forwardDirect computes the features from the embeddings and filters.
func (p *Predictor) forwardDirect(rows []int32) {
	m := p.m
	d, f := m.Config.Dim, m.Config.Filters
	if p.wt == nil {
		p.wt = make([][]float32, len(m.Convs))
		for i, cv := range m.Convs {
			p.wt[i] = transposeConv(cv.W, f, d, cv.Width)
		}
	}
	n := len(rows)
	// Positions go in blocks of 4, so the buffer holds zero rows past the
	// text for the last block's windows: window p is x[p*d : (p+w)*d].
	need := (n + 3 + m.Config.MaxWidth()) * d
	if cap(p.x) < need {
		p.x = make([]float32, max(need, (m.TokenSettings.Limit()+3+m.Config.MaxWidth())*d))
	}
	x := p.x[:need]
	for i, r := range rows {
		copy(x[i*d:(i+1)*d], m.Emb[int(r)*d:(int(r)+1)*d])
	}
	clear(x[n*d:])
	out := &p.out4
	for i, cv := range m.Convs {
		w := cv.Width
		l := w * d
		mx, win := p.feat[i*f:(i+1)*f], p.win[i*f:(i+1)*f]
		for c := range mx {
			mx[c], win[c] = 0, -1
		}
		wt := p.wt[i]
		for pos := 0; pos < n; pos += 4 {
			xs := x[pos*d:]
			for c := range f {
				p.k.Dot4(wt[c*l:(c+1)*l], xs, d, out)
				for j := range min(4, n-pos) {
					if v := cv.B[c] + out[j]; v > mx[c] {
						mx[c], win[c] = v, int32(pos+j)
					}
				}
			}
		}
	}
}

// dense applies the optional hidden layer (with ReLU) and the output layer.
func (p *Predictor) dense() {
	in := p.feat
	if h := p.m.Hidden; h != nil {
		for o := range h.Out {
			p.hid[o] = max(0, h.B[o]+p.k.Dot(h.W[o*h.In:(o+1)*h.In], in))
		}
		in = p.hid
	}
	o := &p.m.Out
	for c := range o.Out {
		p.logits[c] = o.B[c] + p.k.Dot(o.W[c*o.In:(c+1)*o.In], in)
	}
}

// softmax sets dst to the softmax of x, subtracting the maximum first so
// that no exponential overflows.
func softmax(dst, x []float32) {
	mx := float32(math.Inf(-1))
	for _, v := range x {
		mx = max(mx, v)
	}
	var sum float64
	for i, v := range x {
		e := math.Exp(float64(v - mx))
		dst[i] = float32(e)
		sum += e
	}
	for i := range dst {
		dst[i] = float32(float64(dst[i]) / sum)
	}
}
