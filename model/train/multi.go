package train

import (
	"convtag/model"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"convtag/model/metrics"
)

// ErrBadTags is a multi-label example whose label list is out of range or
// names a label twice.
var ErrBadTags = errors.New("model: example tags out of range or repeated")

// ThresholdGoal says how a multi-label model's per-label thresholds are
// chosen on the dev split. The zero value maximises each label's F1.
type ThresholdGoal struct {
	// Precision, when in (0, 1], asks instead for the lowest threshold at
	// which the label's dev precision reaches it and stays there for every
	// higher threshold (metrics.PrecisionThreshold).
	Precision float64
}

// String is the goal as ParseThresholdGoal reads it.
func (g ThresholdGoal) String() string {
	if g.Precision > 0 {
		return "precision:" + strconv.FormatFloat(g.Precision, 'g', -1, 64)
	}
	return "f1"
}

// ParseThresholdGoal reads "f1" or "precision:P" with P in (0, 1].
func ParseThresholdGoal(s string) (ThresholdGoal, error) {
	if s == "f1" || s == "" {
		return ThresholdGoal{}, nil
	}
	v, ok := strings.CutPrefix(s, "precision:")
	if ok {
		p, err := strconv.ParseFloat(v, 64)
		if err == nil && p > 0 && p <= 1 {
			return ThresholdGoal{Precision: p}, nil
		}
	}
	return ThresholdGoal{}, fmt.Errorf("threshold goal %q: want f1 or precision:P with P in (0, 1], e.g. precision:0.9", s)
}

// LabelThreshold is how one label's threshold was chosen on dev.
type LabelThreshold struct {
	Label     string  `json:"label"`
	Threshold float64 `json:"threshold"`
	// Tuned is false when dev had no record with the label (or no dev
	// set): the threshold is then model.DefaultThreshold.
	Tuned bool `json:"tuned"`
	// F1 and Precision are the label's dev figures at the threshold;
	// Reached, with a precision goal, whether the goal was met (if not,
	// the threshold is the one with the highest dev precision).
	F1        float64 `json:"f1"`
	Precision float64 `json:"precision"`
	Reached   bool    `json:"reached,omitempty"`
	Support   int     `json:"support"` // dev records with the label
}

func checkTags(tags []int, labels int) error {
	for i, c := range tags {
		if c < 0 || c >= labels {
			return fmt.Errorf("%w: %d", ErrBadTags, c)
		}
		for _, d := range tags[:i] {
			if d == c {
				return fmt.Errorf("%w: %d twice", ErrBadTags, c)
			}
		}
	}
	return nil
}

// BalancedPositiveWeights returns, per label, the weight of its positive
// term in the binary cross-entropy: negatives / positives among train (the
// ratio PyTorch's BCEWithLogitsLoss documentation suggests for pos_weight,
// common practice for rare labels). A label without positives, or
// without negatives, gets 1.
func BalancedPositiveWeights(train []Example, labels int) []float64 {
	pos := make([]int, labels)
	for _, e := range train {
		for _, c := range e.Tags {
			if c >= 0 && c < labels {
				pos[c]++
			}
		}
	}
	w := make([]float64, labels)
	for c, n := range pos {
		w[c] = 1
		if n > 0 && n < len(train) {
			w[c] = float64(len(train)-n) / float64(n)
		}
	}
	return w
}

// softplus is log(1 + exp(x)), computed without overflow.
func softplus(x float64) float64 { return max(x, 0) + math.Log1p(math.Exp(-math.Abs(x))) }

// exampleMulti runs forward and backward for a multi-label e, adding to
// w.g the gradient of its binary cross-entropy with logits, label c's
// positive term weighted by pw[c], scaled by scale:
//
//	loss_c = pw_c · y_c · softplus(−z_c) + (1 − y_c) · softplus(z_c)
//	∂loss_c/∂z_c = pw_c · y_c · (σ(z_c) − 1) + (1 − y_c) · σ(z_c)
//
// (PyTorch's BCEWithLogitsLoss with pos_weight).
func (w *trainWorker) exampleMulti(p *netParams, e *Example, pw []float32, scale float32, dropout float64, seed, exSeed uint64) {
	w.forward(p, e.Rows, dropout, seed, exSeed)
	w.tokens += len(w.rows)
	clear(w.y)
	for _, c := range e.Tags {
		w.y[c] = 1
	}
	exact := true
	for c, y := range w.y {
		z := float64(w.raw[c])
		sig := 1 / (1 + math.Exp(-z))
		if y == 1 {
			w.loss += float64(pw[c]) * softplus(-z)
			w.dlog[c] = float32(float64(pw[c]) * (sig - 1) * float64(scale))
		} else {
			w.loss += softplus(z)
			w.dlog[c] = float32(sig * float64(scale))
		}
		if (sig >= 0.5) != (y == 1) {
			exact = false
		}
	}
	if exact {
		w.correct++
	}
	w.backward(p)
}

// evaluateMulti returns the subset accuracy, macro-F1 and micro-F1 on ex
// at threshold 0.5 and the mean binary cross-entropy (unweighted, over
// records and labels) with the current weights, without dropout.
func (t *trainer) evaluateMulti(ex []Example) (acc, macroF1, microF1, loss float64) {
	t.pack()
	c := len(t.m.Labels)
	gold, pred := indicator(ex, c), make([][]bool, len(ex))
	losses := make([]float64, len(ex))
	nw := min(len(t.ws), len(ex))
	t.parallel(nw, func(k int) {
		w := t.ws[k]
		for i := k * len(ex) / nw; i < (k+1)*len(ex)/nw; i++ {
			w.forward(t.p, ex[i].Rows, -1, 0, 0)
			pred[i] = make([]bool, c)
			for j, z := range w.raw {
				pred[i][j] = z >= 0
				if gold[i][j] {
					losses[i] += softplus(-float64(z))
				} else {
					losses[i] += softplus(float64(z))
				}
			}
		}
	})
	for _, l := range losses { // summed in record order: deterministic at any -j
		loss += l
	}
	loss /= float64(len(ex) * c)
	s, err := metrics.ScoreSets(nil, gold, pred)
	if err != nil {
		return 0, 0, 0, loss
	}
	return s.SubsetAccuracy, s.Macro.F1, s.Micro.F1, loss
}

// indicator turns examples' Tags into indicator rows of c labels.
func indicator(ex []Example, c int) [][]bool {
	out := make([][]bool, len(ex))
	for i, e := range ex {
		out[i] = make([]bool, c)
		for _, t := range e.Tags {
			out[i][t] = true
		}
	}
	return out
}

// chooseThresholds sets m.Thresholds from the trained m's probabilities on
// dev (its own forward pass, as tag will run it), one label at a time.
func chooseThresholds(m *model.Model, dev []Example, goal ThresholdGoal) ([]LabelThreshold, error) {
	k := len(m.Labels)
	gold := indicator(dev, k)
	scores := make([][]float64, k)
	p := m.NewPredictor()
	for _, e := range dev {
		for c, v := range p.PredictRows(e.Rows) {
			scores[c] = append(scores[c], float64(v))
		}
	}
	m.Thresholds = make([]float64, k)
	out := make([]LabelThreshold, k)
	for c, l := range m.Labels {
		g := make([]bool, len(dev))
		for i := range dev {
			g[i] = gold[i][c]
		}
		lt := LabelThreshold{Label: l, Threshold: model.DefaultThreshold}
		for _, y := range g {
			if y {
				lt.Support++
			}
		}
		if lt.Support > 0 {
			lt.Tuned = true
			if goal.Precision > 0 {
				op, err := metrics.PrecisionThreshold(g, scores[c], goal.Precision, false)
				if err != nil {
					return nil, fmt.Errorf("label %q: %w", l, err)
				}
				lt.Threshold, lt.Reached = op.Threshold, op.Reached
			} else {
				th, _, _, err := metrics.BestF1Threshold(g, scores[c])
				if err != nil {
					return nil, fmt.Errorf("label %q: %w", l, err)
				}
				lt.Threshold = th
			}
		}
		lt.F1, lt.Precision = devAt(g, scores[c], lt.Threshold)
		m.Thresholds[c] = lt.Threshold
		out[c] = lt
	}
	return out, nil
}

// devAt is F1 and precision of "score >= t" against g (0 when undefined).
func devAt(g []bool, score []float64, t float64) (f1, prec float64) {
	tp, fp, fn := 0, 0, 0
	for i, y := range g {
		switch p := score[i] >= t; {
		case p && y:
			tp++
		case p:
			fp++
		case y:
			fn++
		}
	}
	if tp+fp > 0 {
		prec = float64(tp) / float64(tp+fp)
	}
	if tp > 0 {
		f1 = float64(2*tp) / float64(2*tp+fp+fn)
	}
	return f1, prec
}
