package linear

import (
	"fmt"
	"math"
)

// Model is a fitted classifier. It is read-only after Fit, Choose or New
// and safe for concurrent use; scoring goes through a Predictor per
// goroutine.
//
// Its exported arrays are what a model file stores, one tensor each, in
// the layout they have here, so that a mapped file can be handed to New
// without copying or parsing: the Vocabulary's Grams (uint8), Offsets
// (int64), Index (int32) and IDF (float32), then Weights (float32,
// [features][labels]) and Bias (float32, [labels]). Weights are
// feature-major (the transpose of scikit-learn's coef_) because scoring
// reads the row of every n-gram a text holds: one n-gram's weights for all
// labels are adjacent.
type Model struct {
	Vocabulary
	Weights []float32 // [Len()][Labels()]
	Bias    []float32 // [Labels()], the intercepts
	C       float64   // the regularisation strength it was fitted with (metadata)
}

// New checks the arrays' shapes (in O(1); Verify does the rest) and returns
// the model over them. The arrays are used in place, not copied.
func New(v Vocabulary, weights, bias []float32, c float64) (*Model, error) {
	if err := v.check(); err != nil {
		return nil, err
	}
	if len(bias) < 1 || len(bias) > 1<<16 {
		return nil, fmt.Errorf("%w: %d labels", ErrArrays, len(bias))
	}
	if len(weights) != v.Len()*len(bias) {
		return nil, fmt.Errorf("%w: %d weights for %d features x %d labels", ErrArrays, len(weights), v.Len(), len(bias))
	}
	return &Model{Vocabulary: v, Weights: weights, Bias: bias, C: c}, nil
}

// Labels is the number of labels.
func (m *Model) Labels() int { return len(m.Bias) }

// Verify runs the vocabulary's O(features) checks and checks that every
// weight and intercept is finite.
func (m *Model) Verify() error {
	if err := m.Vocabulary.Verify(); err != nil {
		return err
	}
	for i, w := range m.Weights {
		if math.IsNaN(float64(w)) || math.IsInf(float64(w), 0) {
			return fmt.Errorf("%w: weight %d is %g", ErrArrays, i, w)
		}
	}
	for i, w := range m.Bias {
		if math.IsNaN(float64(w)) || math.IsInf(float64(w), 0) {
			return fmt.Errorf("%w: intercept %d is %g", ErrArrays, i, w)
		}
	}
	return nil
}

// Predictor scores texts with a Model. It holds scratch space, so each
// goroutine needs its own; after the first few texts it allocates nothing.
type Predictor struct {
	m     *Model
	ents  []Entry
	probs []float64
}

// NewPredictor returns a Predictor for m.
func (m *Model) NewPredictor() *Predictor {
	return &Predictor{m: m, ents: make([]Entry, 0, 64), probs: make([]float64, m.Labels())}
}

// Probs returns the probability of each label for tokens: the softmax of
// the intercepts plus the weights times the text's tf-idf vector. The slice
// belongs to p and is overwritten by the next call.
func (p *Predictor) Probs(tokens []string) []float64 {
	p.ents = p.m.TfIdf(p.ents, tokens)
	return p.softmax()
}

// ProbsOf is Probs for tokens read through the Tokens interface.
func (p *Predictor) ProbsOf(tokens Tokens) []float64 {
	p.ents = p.m.TfIdfOf(p.ents, tokens)
	return p.softmax()
}

// Predict returns the most probable label for tokens (the lowest index on
// a tie).
func (p *Predictor) Predict(tokens []string) int { return argmax(p.Probs(tokens)) }

func (p *Predictor) softmax() []float64 {
	m, z := p.m, p.probs
	l := len(z)
	for c := range z {
		z[c] = float64(m.Bias[c])
	}
	for _, e := range p.ents {
		w := m.Weights[int(e.Feature)*l : int(e.Feature)*l+l]
		for c := range z {
			z[c] += e.Value * float64(w[c])
		}
	}
	softmaxInPlace(z)
	return z
}

// softmaxInPlace turns scores into probabilities, shifting by the largest
// score first so exp cannot overflow. It returns log of the sum of the
// shifted exponentials plus the shift (the log-partition).
func softmaxInPlace(z []float64) float64 {
	hi := math.Inf(-1)
	for _, v := range z {
		hi = max(hi, v)
	}
	var sum float64
	for c, v := range z {
		z[c] = math.Exp(v - hi)
		sum += z[c]
	}
	for c := range z {
		z[c] /= sum
	}
	return hi + math.Log(sum)
}

func argmax(p []float64) int {
	best := 0
	for c, v := range p {
		if v > p[best] {
			best = c
		}
	}
	return best
}
