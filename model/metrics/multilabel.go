package metrics

import (
	"fmt"
	"math"
	"slices"
)

// MultiReport is every figure of a multi-label evaluation: each record has
// a set of true labels and gets every label whose probability reaches that
// label's threshold. Precision, recall and F1 are 0 when their denominator
// is (scikit-learn's zero_division=0). Its JSON form is what `convtag eval
// --json` prints for a multi-label model.
type MultiReport struct {
	Labels  []string `json:"labels"`
	Records int      `json:"records"`
	// Thresholds are the per-label thresholds the figures are taken at.
	Thresholds []float64 `json:"label_thresholds"`
	// SubsetAccuracy is the fraction of records whose predicted set equals
	// the true set exactly (scikit-learn's accuracy_score on indicator
	// matrices).
	SubsetAccuracy float64 `json:"subset_accuracy"`
	// HammingLoss is the fraction of (record, label) pairs predicted
	// wrongly (scikit-learn's hamming_loss).
	HammingLoss float64 `json:"hamming_loss"`
	// Micro pools every label's counts; Macro is the unweighted mean over
	// all labels (scikit-learn's average="micro" and "macro").
	Micro    PRF          `json:"micro"`
	Macro    PRF          `json:"macro"`
	PerLabel []LabelStats `json:"per_label"`
	// Tables: per label, the effect of each of Levels as that label's
	// threshold (one-vs-rest: kept are the records scored at or above it).
	Tables []LabelThresholds `json:"threshold_tables"`
	// Curves: per label, the one-vs-rest precision-recall curve.
	Curves []LabelCurve `json:"pr_curves,omitempty"`
	// Target is set when a target precision was asked for: per label, the
	// lowest threshold that reaches it (see LowestThreshold).
	Target *Target `json:"target,omitempty"`
}

// PRF is a precision, recall and F1.
type PRF struct {
	Precision float64 `json:"precision"`
	Recall    float64 `json:"recall"`
	F1        float64 `json:"f1"`
}

// LabelCurve is one label's precision-recall curve.
type LabelCurve struct {
	Label  string    `json:"label"`
	Points []PRPoint `json:"points"`
}

// MultiScores holds the figures that depend only on the decisions.
type MultiScores struct {
	SubsetAccuracy, HammingLoss float64
	Micro, Macro                PRF
	PerLabel                    []LabelStats
}

// ScoreSets computes the decision figures from true and predicted label
// sets as indicator rows (gold[i][c] is whether record i has label c).
// labels may be nil (the LabelStats then have no names). Rows of a
// different width than the first are an ErrShape.
func ScoreSets(labels []string, gold, pred [][]bool) (MultiScores, error) {
	if len(gold) == 0 {
		return MultiScores{}, ErrNoRecords
	}
	k := len(gold[0])
	if len(pred) != len(gold) {
		return MultiScores{}, fmt.Errorf("%w: %d true rows, %d predicted", ErrShape, len(gold), len(pred))
	}
	tp, fp, fn := make([]int, k), make([]int, k), make([]int, k)
	exact, wrong := 0, 0
	for i := range gold {
		if len(gold[i]) != k || len(pred[i]) != k {
			return MultiScores{}, fmt.Errorf("record %d: %w: %d and %d values for %d labels", i, ErrShape, len(gold[i]), len(pred[i]), k)
		}
		same := true
		for c := range k {
			g, p := gold[i][c], pred[i][c]
			switch {
			case g && p:
				tp[c]++
			case p:
				fp[c]++
			case g:
				fn[c]++
			}
			if g != p {
				same = false
				wrong++
			}
		}
		if same {
			exact++
		}
	}
	s := MultiScores{SubsetAccuracy: ratio0(exact, len(gold)), HammingLoss: ratio0(wrong, len(gold)*k)}
	var TP, FP, FN int
	for c := range k {
		st := LabelStats{Precision: ratio0(tp[c], tp[c]+fp[c]), Recall: ratio0(tp[c], tp[c]+fn[c]),
			F1: ratio0(2*tp[c], 2*tp[c]+fp[c]+fn[c]), Support: tp[c] + fn[c], Predicted: tp[c] + fp[c],
			AveragePrecision: Fraction(math.NaN())}
		if c < len(labels) {
			st.Label = labels[c]
		}
		s.PerLabel = append(s.PerLabel, st)
		s.Macro.Precision += st.Precision / float64(k)
		s.Macro.Recall += st.Recall / float64(k)
		s.Macro.F1 += st.F1 / float64(k)
		TP, FP, FN = TP+tp[c], FP+fp[c], FN+fn[c]
	}
	s.Micro = PRF{ratio0(TP, TP+FP), ratio0(TP, TP+FN), ratio0(2*TP, 2*TP+FP+FN)}
	return s, nil
}

// oneVsRest returns, for label c, the gold and pred arrays with which the
// single-label functions (LowestThreshold, PRCurve) see c's one-vs-rest
// problem: every record is "predicted c" and is truly c when it has c.
func oneVsRest(gold [][]bool, probs [][]float32, c int) (g, p []int, conf []float64) {
	g, p, conf = make([]int, len(gold)), make([]int, len(gold)), make([]float64, len(gold))
	for i := range gold {
		g[i], p[i], conf[i] = -1, c, float64(probs[i][c])
		if gold[i][c] {
			g[i] = c
		}
	}
	return g, p, conf
}

// EvaluateMulti computes every figure of a multi-label evaluation: gold
// are the true label sets as indicator rows, probs one probability per
// label (each in [0, 1], independently), thresholds the per-label
// thresholds (a label is predicted when its probability is >= its
// threshold). A NaN or infinite probability is refused with ErrNotFinite.
func EvaluateMulti(labels []string, gold [][]bool, probs [][]float32, thresholds []float64, opt Options) (*MultiReport, error) {
	k := len(labels)
	if len(gold) == 0 {
		return nil, ErrNoRecords
	}
	if k == 0 || len(probs) != len(gold) || len(thresholds) != k {
		return nil, fmt.Errorf("%w: %d records, %d probability rows, %d labels, %d thresholds", ErrShape, len(gold), len(probs), k, len(thresholds))
	}
	pred := make([][]bool, len(gold))
	for i := range gold {
		if len(gold[i]) != k || len(probs[i]) != k {
			return nil, fmt.Errorf("record %d: %w: %d values for %d labels", i, ErrShape, len(probs[i]), k)
		}
		pred[i] = make([]bool, k)
		for c, v := range probs[i] {
			if !finite(float64(v)) {
				return nil, fmt.Errorf("record %d: %w: %v for label %d", i, ErrNotFinite, v, c)
			}
			pred[i][c] = float64(v) >= thresholds[c]
		}
	}
	s, err := ScoreSets(labels, gold, pred)
	if err != nil {
		return nil, err
	}
	r := &MultiReport{Labels: slices.Clone(labels), Records: len(gold), Thresholds: slices.Clone(thresholds),
		SubsetAccuracy: s.SubsetAccuracy, HammingLoss: s.HammingLoss, Micro: s.Micro, Macro: s.Macro, PerLabel: s.PerLabel}
	if t := opt.TargetPrecision; t > 0 && t <= 1 {
		r.Target = &Target{Precision: t, Conservative: opt.Conservative, Overall: Operating{Precision: Fraction(math.NaN()),
			Recall: Fraction(math.NaN()), Coverage: Fraction(math.NaN())}}
	}
	for c, l := range labels {
		g, p, conf := oneVsRest(gold, probs, c)
		pts, ap, err := PRCurve(g, probs, c)
		if err != nil {
			return nil, err
		}
		r.PerLabel[c].AveragePrecision = ap
		r.Curves = append(r.Curves, LabelCurve{Label: l, Points: pts})
		lt := LabelThresholds{Label: l}
		for _, lv := range Levels {
			kept, right := 0, 0
			for i, v := range conf {
				if v >= lv {
					kept++
					if g[i] == c {
						right++
					}
				}
			}
			lt.Rows = append(lt.Rows, row(lv, right, kept, s.PerLabel[c].Support, len(gold)))
		}
		r.Tables = append(r.Tables, lt)
		if r.Target != nil {
			op, err := LowestThreshold(g, p, conf, c, r.Target.Precision, opt.Conservative)
			if err != nil {
				return nil, err
			}
			r.Target.PerLabel = append(r.Target.PerLabel, OperatingAt{Label: l, Operating: op})
		}
	}
	return r, nil
}

// BestF1Threshold returns the threshold that maximises the F1 of one
// label's one-vs-rest decision "score >= threshold" on records whose truth
// is gold, and that F1. Every distinct score is a candidate; on ties the
// higher threshold wins (fewer tags for the same F1). The threshold
// returned is the shortest decimal that keeps exactly the same records as
// the winning score (as LowestThreshold's are). ok is false when no
// record is positive (F1 is then 0 at every threshold). A NaN or infinite
// score is refused with ErrNotFinite.
func BestF1Threshold(gold []bool, score []float64) (threshold, f1 float64, ok bool, err error) {
	idx := make([]int, len(score))
	pos := 0
	for i := range idx {
		if !finite(score[i]) {
			return 0, 0, false, fmt.Errorf("record %d: %w: %v", i, ErrNotFinite, score[i])
		}
		idx[i] = i
		if gold[i] {
			pos++
		}
	}
	if pos == 0 {
		return 0, 0, false, nil
	}
	slices.SortStableFunc(idx, func(a, b int) int {
		switch {
		case score[a] > score[b]:
			return -1
		case score[a] < score[b]:
			return 1
		}
		return 0
	})
	best := -1.0
	tp, kept := 0, 0
	for j := 0; j < len(idx); {
		v := score[idx[j]]
		for start := j; j < len(idx) && (j == start || score[idx[j]] == v); j++ {
			kept++
			if gold[idx[j]] {
				tp++
			}
		}
		// F1 = 2TP / (2TP + FP + FN) = 2TP / (kept + pos).
		if f := float64(2*tp) / float64(kept+pos); f > best {
			lo := 0.0
			if j < len(idx) {
				lo = score[idx[j]]
			}
			best, threshold = f, shortestIn(lo, v)
		}
	}
	return threshold, best, true, nil
}

// PrecisionThreshold is LowestThreshold for one label of a multi-label
// problem: the lowest threshold at which the records scored at or above it
// reach precision target, with every higher threshold reaching it too.
func PrecisionThreshold(gold []bool, score []float64, target float64, conservative bool) (Operating, error) {
	g, p := make([]int, len(gold)), make([]int, len(gold))
	for i, y := range gold {
		if y {
			g[i] = 1
		}
		p[i] = 1
	}
	return LowestThreshold(g, p, score, 1, target, conservative)
}
