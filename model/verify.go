package model

import (
	"math"

	"convtag/model/nb"
)

// checkProbes runs the forward pass, direct and (when the model has fold
// tables) folded, on a few probe texts: an empty text, the first, a middle
// and the last vocabulary word, an unknown word (the first bucket row) and
// all of them in a row. Every probability must be finite and in [0, 1] and
// (single-label) they must sum to 1 within probeTolerance. Weights that are each finite
// can still overflow a dot product (3e38 × 2 is +Inf), and then softmax
// gives NaN, which eval cannot measure and tag cannot rank.
func (m *Model) checkProbes() error {
	n := m.Vocab.Len()
	type probe struct {
		name string
		rows []int32
	}
	probes := []probe{{"an empty text", nil}, {"an unknown word", []int32{int32(n + 1)}}}
	if n > 0 {
		probes = append(probes,
			probe{"the first word", []int32{1}},
			probe{"a middle word", []int32{int32(n/2 + 1)}},
			probe{"the last word", []int32{int32(n)}},
			probe{"those words in a row", []int32{1, int32(n/2 + 1), int32(n), int32(n + 1)}})
	}
	// Common practice for a float32 softmax: each value is rounded once
	// (relative error 2^-24) and the sum accumulates one rounding per
	// label, so allow 2^-23 per label on top of a fixed 1e-4.
	tol := 1e-4 + float64(len(m.Labels))*0x1p-23
	paths := []bool{true}
	if m.Fold != nil {
		paths = append(paths, false)
	}
	p := m.NewPredictor()
	for _, direct := range paths {
		path := "folded"
		if direct {
			path = "direct"
		}
		p.SetDirect(direct)
		for _, pr := range probes {
			probs := p.PredictRows(pr.rows)
			var sum float64
			for c, v := range probs {
				if !(v >= 0 && v <= 1) { // false for NaN too
					return formatErr("", ErrForward, "%s (%s path) gives %v for label %s", pr.name, path, v, quoteCapped(m.Labels[c]))
				}
				sum += float64(v)
			}
			if !m.Multi && math.Abs(sum-1) > tol {
				return formatErr("", ErrForward, "%s (%s path) gives probabilities summing to %v", pr.name, path, sum)
			}
		}
	}
	return nil
}

// checkBaseline checks the stored naive-Bayes baseline, if any: it must
// decode, have the model's labels, and give some label a finite score (a
// baseline fitted on no document gives every label log 0, and eval's
// posteriors 0/0).
func (m *Model) checkBaseline() error {
	if len(m.Baseline) == 0 {
		return nil
	}
	b, err := nb.Decode(m.Baseline)
	if err != nil {
		return formatErr(TensorBaseline, ErrBaseline, "%v", err)
	}
	if b.Labels() != len(m.Labels) {
		return formatErr(TensorBaseline, ErrBaseline, "%d labels, the model has %d", b.Labels(), len(m.Labels))
	}
	best := math.Inf(-1)
	for _, s := range b.Scores(nil) {
		best = max(best, s)
	}
	if math.IsInf(best, 0) || math.IsNaN(best) {
		return formatErr(TensorBaseline, ErrBaseline, "no label has a finite score (fitted on no document)")
	}
	return nil
}

// checkLinear runs the linear baseline's O(features) checks (offsets,
// index, finite weights), which Open leaves out.
func (m *Model) checkLinear() error {
	if m.Linear == nil {
		return nil
	}
	if m.Linear.Labels() != len(m.Labels) {
		return formatErr(TensorLinearBias, ErrBaseline, "%d labels, the model has %d", m.Linear.Labels(), len(m.Labels))
	}
	if err := m.Linear.Verify(); err != nil {
		return formatErr(TensorLinearGrams, ErrBaseline, "%v", err)
	}
	return nil
}
