package train

import (
	"math"

	"convtag/model/internal/kernel"
)

// optState is the optimiser's per-parameter state: for Adadelta the running
// means of squared gradients (a) and of squared updates (b), for Adam the
// first (a) and second (b) moments. embA and embB are the same for the
// embedding, whose rows are updated only when a batch touches them.
type optState struct {
	a, b       [][]float32
	embA, embB []float32
	k          *kernel.Set
}

func newOptState(p *netParams, _ string) optState {
	s := optState{k: p.kern}
	for _, t := range p.list {
		s.a = append(s.a, make([]float32, len(t)))
		s.b = append(s.b, make([]float32, len(t)))
	}
	s.embA = make([]float32, len(p.emb))
	s.embB = make([]float32, len(p.emb))
	return s
}

// step updates dense weights w with gradient g at step t (from 1).
//
// Adadelta is Zeiler (2012), "ADADELTA: An Adaptive Learning Rate Method",
// algorithm 1, in the form of torch.optim.Adadelta (learning rate lr scales
// the update; the running mean of squared updates is kept unscaled). Adam
// is Kingma and Ba (2015), algorithm 1, in the form of torch.optim.Adam
// (epsilon added to the bias-corrected root of the second moment).
func (s *optState) step(opt string, t int, lr float32, w, g, a, b []float32) {
	switch opt {
	case OptAdadelta:
		s.k.Adadelta(lr, w, g, a, b)
	case OptAdam:
		bc1 := float32(1 - math.Pow(AdamBeta1, float64(t)))
		sq2 := float32(math.Sqrt(1 - math.Pow(AdamBeta2, float64(t))))
		for i, gi := range g {
			a[i] = AdamBeta1*a[i] + (1-AdamBeta1)*gi
			b[i] = AdamBeta2*b[i] + (1-AdamBeta2)*gi*gi
			denom := trSqrt(b[i])/sq2 + AdamEps
			w[i] -= lr / bc1 * a[i] / denom
		}
	}
}

// embStep updates one embedding row. Adadelta is as in step, applied only
// to rows the batch touched. Adam follows torch.optim.SparseAdam (the lazy
// variant for sparse gradients: moments of untouched rows are left alone,
// bias correction uses the global step, epsilon is added to the root of
// the uncorrected second moment).
func (s *optState) embStep(opt string, t int, lr float32, w, g, a, b []float32) {
	switch opt {
	case OptAdadelta:
		s.k.Adadelta(lr, w, g, a, b)
	case OptAdam:
		bc1 := 1 - math.Pow(AdamBeta1, float64(t))
		bc2 := 1 - math.Pow(AdamBeta2, float64(t))
		stepSize := float32(float64(lr) * math.Sqrt(bc2) / bc1)
		for i, gi := range g {
			a[i] = AdamBeta1*a[i] + (1-AdamBeta1)*gi
			b[i] = AdamBeta2*b[i] + (1-AdamBeta2)*gi*gi
			w[i] -= stepSize * a[i] / (trSqrt(b[i]) + AdamEps)
		}
	}
}

func trSqrt(x float32) float32 { return float32(math.Sqrt(float64(x))) }
