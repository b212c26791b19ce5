package linear

import (
	"errors"
	"fmt"
	"math"
	"slices"
)

// Options tune Fit and Choose. The zero value is useful: C 1, every
// n-gram, tolerance 1e-8, at most 10,000 iterations.
type Options struct {
	// C is the inverse regularisation strength (scikit-learn's C): the fit
	// minimises C times the summed log-loss plus half the squared L2 norm
	// of the weights (intercepts are not penalised). 0 means 1. Choose
	// ignores it.
	C float64
	// MaxFeatures keeps only the most frequent n-grams (see
	// BuildVocabulary); 0 keeps them all.
	MaxFeatures int
	// Tolerance stops the optimiser once the largest gradient component of
	// the objective divided by the number of texts is below it. 0 means
	// 1e-8, the tol the scikit-learn comparison passes to its lbfgs.
	Tolerance float64
	// MaxIterations caps the optimiser's iterations; 0 means 10,000.
	MaxIterations int
}

// DefaultGrid is the C values Choose tries when given none: half-decades
// from 0.1 to 100 (common practice for this regulariser).
var DefaultGrid = []float64{0.1, 0.3, 1, 3, 10, 30, 100}

// ErrNotConverged is wrapped when the optimiser stops before the tolerance.
var ErrNotConverged = errors.New("linear: optimiser did not converge")

// Fit builds the vocabulary of docs (token lists) and fits multinomial
// logistic regression to their labels (indices below labels).
//
// The problem is the one scikit-learn's LogisticRegression(penalty='l2',
// multi_class='multinomial', solver='lbfgs') solves (its user guide,
// "Logistic regression", multinomial case): minimise over W and b
//
//	C * sum_i -log softmax(W x_i + b)[y_i]  +  ||W||^2 / 2
//
// divided here by the number of texts (which moves no minimum but keeps the
// gradient's scale independent of it). It is strictly convex in W, so any
// solver reaching the tolerance lands near the same point. The solver is
// L-BFGS (see minimize) from all zeros, evaluated in a fixed order in float64, so
// the same input gives bit-identical weights; they are stored as float32.
func Fit(docs [][]string, y []int, labels int, o Options) (*Model, error) {
	if err := checkSet(docs, y, labels); err != nil {
		return nil, err
	}
	v, err := BuildVocabulary(docs, o.MaxFeatures)
	if err != nil {
		return nil, err
	}
	return fitOn(v, matrix(v, docs), y, labels, cOr1(o.C), o)
}

func cOr1(c float64) float64 {
	if c == 0 {
		return 1
	}
	return c
}

func checkSet(docs [][]string, y []int, labels int) error {
	if len(docs) != len(y) {
		return fmt.Errorf("%w: %d documents, %d labels", ErrInput, len(docs), len(y))
	}
	if len(docs) == 0 || labels < 2 || labels > 1<<16 {
		return fmt.Errorf("%w: %d documents, %d labels; need at least one document and two labels", ErrInput, len(docs), labels)
	}
	for i, c := range y {
		if c < 0 || c >= labels {
			return fmt.Errorf("%w: document %d: label %d out of range", ErrInput, i, c)
		}
	}
	return nil
}

// csr is a sparse matrix in compressed rows: row i is ents[rows[i]:rows[i+1]].
type csr struct {
	rows []int
	ents []Entry
}

func matrix(v *Vocabulary, docs [][]string) csr {
	m := csr{rows: make([]int, 1, len(docs)+1)}
	for _, d := range docs {
		m.ents = append(m.ents, v.TfIdf(m.ents[len(m.ents):], d)...)
		m.rows = append(m.rows, len(m.ents))
	}
	return m
}

// objective is the averaged penalised loss and its gradient over the
// parameters laid out as the model stores them: weights [features][labels]
// then intercepts [labels].
type objective struct {
	x      csr
	y      []int
	labels int
	feats  int
	c      float64
	z      []float64
	f      float64
	g      []float64
}

func (o *objective) eval(theta []float64) {
	l, n := o.labels, float64(len(o.y))
	w, b := theta[:o.feats*l], theta[o.feats*l:]
	clear(o.g)
	gw, gb := o.g[:o.feats*l], o.g[o.feats*l:]
	var loss float64
	for i, yi := range o.y {
		z := o.z
		copy(z, b)
		row := o.x.ents[o.x.rows[i]:o.x.rows[i+1]]
		for _, e := range row {
			wj := w[int(e.Feature)*l : int(e.Feature)*l+l]
			for c := range z {
				z[c] += e.Value * wj[c]
			}
		}
		zy := z[yi]
		loss += softmaxInPlace(z) - zy
		z[yi]--
		for c := range z {
			gb[c] += z[c]
		}
		for _, e := range row {
			gj := gw[int(e.Feature)*l : int(e.Feature)*l+l]
			for c := range z {
				gj[c] += e.Value * z[c]
			}
		}
	}
	var ss float64
	reg := 1 / (o.c * n)
	for j, v := range w {
		ss += v * v
		gw[j] = gw[j]/n + reg*v
	}
	for c := range gb {
		gb[c] /= n
	}
	o.f = loss/n + reg*ss/2
}

func fitOn(v *Vocabulary, x csr, y []int, labels int, c float64, o Options) (*Model, error) {
	if !(c > 0) || math.IsInf(c, 0) {
		return nil, fmt.Errorf("%w: C = %g", ErrInput, c)
	}
	tol, iters := o.Tolerance, o.MaxIterations
	if tol == 0 {
		tol = 1e-8
	}
	if iters == 0 {
		iters = 10000
	}
	dim := v.Len()*labels + labels
	obj := &objective{x: x, y: y, labels: labels, feats: v.Len(), c: c, z: make([]float64, labels), g: make([]float64, dim)}
	theta := make([]float64, dim)
	gmax, it := minimize(func(t, g []float64) float64 { obj.eval(t); copy(g, obj.g); return obj.f }, theta, tol, iters)
	if !(gmax < tol) {
		return nil, fmt.Errorf("%w: C %g: largest gradient component %.3g after %d iterations", ErrNotConverged, c, gmax, it)
	}
	m := &Model{Vocabulary: *v, Weights: make([]float32, v.Len()*labels), Bias: make([]float32, labels), C: c}
	for i := range m.Weights {
		m.Weights[i] = float32(theta[i])
	}
	for i := range m.Bias {
		m.Bias[i] = float32(theta[len(m.Weights)+i])
	}
	return m, nil
}

// Choice is what Choose tried and found.
type Choice struct {
	C           float64   // the C of the returned model
	Grid        []float64 // the values tried, in the order given
	DevAccuracy []float64 // the development accuracy of each
}

// Choose builds the vocabulary of train, fits a model for every C in grid
// (DefaultGrid if empty) on it and returns the one with the highest
// accuracy on dev; on a tie the smaller C wins (the stronger penalty). The
// returned model was fitted on train only: a caller who wants the usual
// final refit on train and dev together calls Fit with the chosen C.
func Choose(train [][]string, trainY []int, dev [][]string, devY []int, labels int, grid []float64, o Options) (*Model, Choice, error) {
	if err := checkSet(train, trainY, labels); err != nil {
		return nil, Choice{}, err
	}
	if err := checkSet(dev, devY, labels); err != nil {
		return nil, Choice{}, fmt.Errorf("development set: %w", err)
	}
	if len(grid) == 0 {
		grid = DefaultGrid
	}
	v, err := BuildVocabulary(train, o.MaxFeatures)
	if err != nil {
		return nil, Choice{}, err
	}
	x := matrix(v, train)
	ch := Choice{Grid: slices.Clone(grid), DevAccuracy: make([]float64, len(grid))}
	var best *Model
	for k, c := range grid {
		m, err := fitOn(v, x, trainY, labels, c, o)
		if err != nil {
			return nil, Choice{}, err
		}
		p := m.NewPredictor()
		right := 0
		for i, d := range dev {
			if p.Predict(d) == devY[i] {
				right++
			}
		}
		ch.DevAccuracy[k] = float64(right) / float64(len(dev))
		if best == nil || ch.DevAccuracy[k] > ch.DevAccuracy[slices.Index(grid, best.C)] ||
			ch.DevAccuracy[k] == ch.DevAccuracy[slices.Index(grid, best.C)] && c < best.C {
			best = m
		}
	}
	ch.C = best.C
	return best, ch, nil
}
