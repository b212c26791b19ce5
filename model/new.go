package model

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"convtag/model/token"
)

// New returns a randomly initialised model with its own (not mapped)
// weights: embedding rows uniform in [-0.25, 0.25] (the random-vector
// setting of Kim 2014), the padding row zero, and every convolution and
// dense layer uniform in [-1/sqrt(fan_in), 1/sqrt(fan_in)] for weights and
// biases, which is the bound of PyTorch's default initialisation for Conv1d
// and Linear. The same arguments and seed give the same model.
func New(cfg Config, tok token.Settings, labels []string, words []string, seed uint64) (*Model, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if len(labels) < 2 {
		return nil, fmt.Errorf("model: need at least 2 labels, have %d", len(labels))
	}
	if i := firstDuplicate(labels); i >= 0 {
		return nil, fmt.Errorf("model: duplicate label %s", quoteCapped(labels[i]))
	}
	if i := firstDuplicate(words); i >= 0 {
		return nil, fmt.Errorf("model: duplicate vocabulary word %q", words[i])
	}
	rng := rand.New(rand.NewPCG(seed, 0x636f6e76746167)) // "convtag"
	uniform := func(dst []float32, bound float64) {
		for i := range dst {
			dst[i] = float32((2*rng.Float64() - 1) * bound)
		}
	}
	m := &Model{
		Config:        cfg,
		TokenSettings: tok,
		Labels:        slices.Clone(labels),
		Vocab:         NewVocab(words, cfg.Buckets),
		Meta:          map[string]string{},
	}
	m.Config.Widths = slices.Clone(cfg.Widths)
	d, f := cfg.Dim, cfg.Filters
	m.Emb = make([]float32, m.Rows()*d)
	uniform(m.Emb[d:], 0.25)
	for _, w := range cfg.Widths {
		c := Conv{Width: w, W: make([]float32, f*d*w), B: make([]float32, f)}
		b := 1 / math.Sqrt(float64(d*w))
		uniform(c.W, b)
		uniform(c.B, b)
		m.Convs = append(m.Convs, c)
	}
	in := cfg.Features()
	if cfg.Hidden > 0 {
		m.Hidden = newDense(in, cfg.Hidden, uniform)
		in = cfg.Hidden
	}
	m.Out = *newDense(in, len(labels), uniform)
	m.tok = token.New(tok)
	return m, nil
}

func newDense(in, out int, uniform func([]float32, float64)) *Dense {
	l := &Dense{In: in, Out: out, W: make([]float32, in*out), B: make([]float32, out)}
	b := 1 / math.Sqrt(float64(in))
	uniform(l.W, b)
	uniform(l.B, b)
	return l
}

func firstDuplicate(s []string) int {
	seen := make(map[string]bool, len(s))
	for i, x := range s {
		if seen[x] {
			return i
		}
		seen[x] = true
	}
	return -1
}

// Tokenizer returns the model's tokenizer, built from TokenSettings when
// the model was made (New) or opened (Open, Load); for a Model put together
// by hand, a new one each call, so the shared Model is never written.
func (m *Model) Tokenizer() *token.Tokenizer {
	if m.tok == nil {
		return token.New(m.TokenSettings)
	}
	return m.tok
}
