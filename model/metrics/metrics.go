package metrics

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
)

// Bins is the number of equal-width confidence bins of the calibration
// figures.
const Bins = 10

// Levels are the confidence thresholds of the threshold tables.
var Levels = []float64{0.50, 0.55, 0.60, 0.65, 0.70, 0.75, 0.80, 0.85, 0.90, 0.95, 0.99}

// Errors of Evaluate.
var (
	ErrNoRecords = errors.New("metrics: no records")
	ErrShape     = errors.New("metrics: probabilities do not match the labels")
	ErrGold      = errors.New("metrics: true label out of range")
	// ErrNotFinite is a NaN or infinite probability or confidence. It is
	// refused, as scikit-learn refuses such input (its check_array raises
	// ValueError "Input contains NaN" or "... infinity"), rather than
	// given a place in an ordering it has none in.
	ErrNotFinite = errors.New("metrics: probability is NaN or infinite")
)

// finite reports whether x is neither NaN nor infinite.
func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// Fraction is a ratio that may be undefined (NaN), for example the
// precision of a threshold that keeps no record. Its JSON form is a number,
// or null when undefined.
type Fraction float64

// Defined reports whether f is a number.
func (f Fraction) Defined() bool { return !math.IsNaN(float64(f)) }

// MarshalJSON writes f as a number, or null when undefined.
func (f Fraction) MarshalJSON() ([]byte, error) {
	if !f.Defined() || math.IsInf(float64(f), 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, float64(f), 'g', -1, 64), nil
}

// UnmarshalJSON reads a number or null (undefined).
func (f *Fraction) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*f = Fraction(math.NaN())
		return nil
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("metrics: fraction %q: %w", b, err)
	}
	*f = Fraction(v)
	return nil
}

func ratio(a, b int) Fraction {
	if b == 0 {
		return Fraction(math.NaN())
	}
	return Fraction(float64(a) / float64(b))
}

// ratio0 is a/b, or 0 when b is 0 (scikit-learn's zero_division default).
func ratio0(a, b int) float64 {
	if b == 0 {
		return 0
	}
	return float64(a) / float64(b)
}

// Report is every figure of one evaluation. Its JSON form is what
// `convtag eval --json` prints.
type Report struct {
	Labels  []string `json:"labels"`
	Records int      `json:"records"`
	// Accuracy is the fraction of records whose predicted label is the
	// true one.
	Accuracy float64 `json:"accuracy"`
	// MacroF1 is the unweighted mean of the per-label F1 over the labels
	// that occur as a true or a predicted label (scikit-learn's
	// f1_score(average="macro") with its default label set).
	MacroF1  float64      `json:"macro_f1"`
	PerLabel []LabelStats `json:"per_label"`
	// Confusion[i][j] counts the records of true label i predicted as j.
	Confusion   [][]int     `json:"confusion"`
	Calibration Calibration `json:"calibration"`
	Thresholds  Thresholds  `json:"thresholds"`
	// Target is set when a target precision was asked for.
	Target *Target `json:"target,omitempty"`
}

// LabelStats are one label's figures. Precision, recall and F1 are 0 when
// their denominator is (scikit-learn's zero_division default).
type LabelStats struct {
	Label     string  `json:"label"`
	Precision float64 `json:"precision"` // TP / (TP + FP)
	Recall    float64 `json:"recall"`    // TP / (TP + FN)
	F1        float64 `json:"f1"`        // 2 TP / (2 TP + FP + FN)
	Support   int     `json:"support"`   // records whose true label this is
	Predicted int     `json:"predicted"` // records predicted as this label
	// AveragePrecision summarises the label's one-vs-rest precision-recall
	// curve (see PRCurve); undefined without support.
	AveragePrecision Fraction `json:"average_precision"`
}

// Calibration compares confidence with accuracy.
type Calibration struct {
	// ECE is the expected calibration error over Bins equal-width bins:
	// sum over bins of |B|/n · |accuracy(B) − mean confidence(B)|, the
	// definition of Guo, Pleiss, Sun and Weinberger (2017), "On Calibration
	// of Modern Neural Networks", ICML, eq. 3, with bin m holding the
	// confidences in ((m−1)/M, m/M].
	ECE float64 `json:"ece"`
	// MCE is the largest |accuracy(B) − mean confidence(B)| over non-empty
	// bins (the same paper's maximum calibration error).
	MCE  float64 `json:"mce"`
	Bins []Bin   `json:"bins"`
}

// Bin is one row of the reliability table: the records whose confidence is
// in (Lo, Hi]. Confidence and Accuracy are undefined for an empty bin.
type Bin struct {
	Lo         float64  `json:"lo"`
	Hi         float64  `json:"hi"`
	Count      int      `json:"count"`
	Confidence Fraction `json:"confidence"` // mean confidence
	Accuracy   Fraction `json:"accuracy"`
}

// Thresholds show what a minimum confidence does: a record whose
// confidence is below the threshold gets no label (as `convtag tag
// --min-confidence` does), the rest keep their predicted label.
type Thresholds struct {
	// Overall counts every label together: precision is the accuracy of
	// the kept records, recall the correct kept records over all records,
	// coverage the kept records over all records.
	Overall []ThresholdRow `json:"overall"`
	// PerLabel: for label c, the kept records are those predicted c with
	// enough confidence; recall is over c's support, coverage over the
	// records predicted c.
	PerLabel []LabelThresholds `json:"per_label"`
}

// LabelThresholds is one label's threshold table.
type LabelThresholds struct {
	Label string         `json:"label"`
	Rows  []ThresholdRow `json:"rows"`
}

// ThresholdRow is the effect of one minimum confidence. Precision is
// undefined when nothing is kept, Recall when there is nothing to find,
// Coverage when nothing was predicted.
type ThresholdRow struct {
	Threshold float64  `json:"threshold"`
	Precision Fraction `json:"precision"`
	Recall    Fraction `json:"recall"`
	Coverage  Fraction `json:"coverage"`
	Kept      int      `json:"kept"`
	Correct   int      `json:"correct"`
	// Relevant is the count recall is taken over (all records overall,
	// the label's support per label).
	Relevant int `json:"relevant"`
	// PrecisionCI and RecallCI are 95% Wilson intervals (see Wilson) over
	// Kept and Relevant records.
	PrecisionCI Interval `json:"precision_ci"`
	RecallCI    Interval `json:"recall_ci"`
	// Few is set when precision rests on fewer than FewRecords records.
	Few bool `json:"few"`
}

// row fills a ThresholdRow from its counts.
func row(threshold float64, right, kept, relevant, predicted int) ThresholdRow {
	return ThresholdRow{Threshold: threshold, Precision: ratio(right, kept), Recall: ratio(right, relevant),
		Coverage: ratio(kept, predicted), Kept: kept, Correct: right, Relevant: relevant,
		PrecisionCI: Wilson(right, kept), RecallCI: Wilson(right, relevant), Few: kept < FewRecords}
}

// Target holds the lowest thresholds that reach a target precision.
type Target struct {
	Precision float64 `json:"precision"`
	// Conservative: the target is met by the lower end of precision's
	// 95% interval (Options.Conservative).
	Conservative bool          `json:"conservative"`
	Overall      Operating     `json:"overall"`
	PerLabel     []OperatingAt `json:"per_label"`
}

// OperatingAt is one label's operating point.
type OperatingAt struct {
	Label string `json:"label"`
	Operating
}

// Operating is an operating point: a threshold and what it gives.
type Operating struct {
	// Reached reports whether some threshold reaches the target. When it
	// is false the fields describe the threshold with the highest
	// precision instead (the lowest such threshold).
	Reached bool `json:"reached"`
	// Threshold is the shortest decimal that keeps exactly the same
	// records as the lowest qualifying confidence, so it can be passed on
	// as written.
	Threshold float64  `json:"threshold"`
	Precision Fraction `json:"precision"`
	Recall    Fraction `json:"recall"`
	Coverage  Fraction `json:"coverage"`
	Kept      int      `json:"kept"`
	// PrecisionCI is the 95% Wilson interval of Precision over Kept
	// records; Few is set when Kept is under FewRecords.
	PrecisionCI Interval `json:"precision_ci"`
	Few         bool     `json:"few"`
}

// Options control Evaluate. The zero value asks for no target.
type Options struct {
	// TargetPrecision, when in (0, 1], fills Report.Target.
	TargetPrecision float64
	// Conservative asks that the lower end of precision's 95% interval,
	// not precision itself, reach TargetPrecision.
	Conservative bool
}

// Predict returns the index of the largest value of probs (the lowest
// index on ties) and that value.
func Predict(probs []float32) (int, float64) {
	best := 0
	for i, v := range probs {
		if v > probs[best] {
			best = i
		}
	}
	return best, float64(probs[best])
}

// check validates the input of Evaluate and returns the predicted labels
// and confidences.
func check(labels []string, gold []int, probs [][]float32) (pred []int, conf []float64, err error) {
	if len(gold) == 0 {
		return nil, nil, ErrNoRecords
	}
	if len(labels) == 0 || len(probs) != len(gold) {
		return nil, nil, fmt.Errorf("%w: %d records, %d probability rows, %d labels", ErrShape, len(gold), len(probs), len(labels))
	}
	pred, conf = make([]int, len(gold)), make([]float64, len(gold))
	for i, g := range gold {
		if g < 0 || g >= len(labels) {
			return nil, nil, fmt.Errorf("record %d: %w: %d", i, ErrGold, g)
		}
		if len(probs[i]) != len(labels) {
			return nil, nil, fmt.Errorf("record %d: %w: %d values for %d labels", i, ErrShape, len(probs[i]), len(labels))
		}
		for j, v := range probs[i] {
			if !finite(float64(v)) {
				return nil, nil, fmt.Errorf("record %d: %w: %v for label %d", i, ErrNotFinite, v, j)
			}
		}
		pred[i], conf[i] = Predict(probs[i])
	}
	return pred, conf, nil
}

// Evaluate computes every figure for records with true labels gold (indices
// into labels) and probabilities probs (one row per record, one value per
// label). It does not keep gold or probs. A NaN or infinite probability
// is refused with ErrNotFinite, naming the record.
func Evaluate(labels []string, gold []int, probs [][]float32, opt Options) (*Report, error) {
	pred, conf, err := check(labels, gold, probs)
	if err != nil {
		return nil, err
	}
	r := &Report{Labels: slices.Clone(labels), Records: len(gold)}
	r.Confusion = Confusion(gold, pred, len(labels))
	r.Accuracy = Accuracy(gold, pred)
	r.PerLabel = PerLabel(r.Confusion, labels)
	r.MacroF1 = MacroF1(r.PerLabel)
	for c := range r.PerLabel {
		_, ap, err := PRCurve(gold, probs, c)
		if err != nil {
			return nil, err
		}
		r.PerLabel[c].AveragePrecision = ap
	}
	r.Calibration = Calibrate(gold, pred, conf, Bins)
	r.Thresholds = ThresholdTables(labels, gold, pred, conf, Levels)
	if t := opt.TargetPrecision; t > 0 && t <= 1 {
		all, err := LowestThreshold(gold, pred, conf, -1, t, opt.Conservative)
		if err != nil {
			return nil, err
		}
		r.Target = &Target{Precision: t, Conservative: opt.Conservative, Overall: all}
		for c, l := range labels {
			op, err := LowestThreshold(gold, pred, conf, c, t, opt.Conservative)
			if err != nil {
				return nil, err
			}
			r.Target.PerLabel = append(r.Target.PerLabel, OperatingAt{Label: l, Operating: op})
		}
	}
	return r, nil
}

// Accuracy is the fraction of pred equal to gold; 0 for no records.
func Accuracy(gold, pred []int) float64 {
	n := 0
	for i := range gold {
		if gold[i] == pred[i] {
			n++
		}
	}
	return ratio0(n, len(gold))
}

// Confusion returns the k×k matrix whose [i][j] counts the records of true
// label i predicted as j (rows true, columns predicted, as scikit-learn's
// confusion_matrix). Labels must be in 0..k-1.
func Confusion(gold, pred []int, k int) [][]int {
	m := make([][]int, k)
	for i := range m {
		m[i] = make([]int, k)
	}
	for i := range gold {
		m[gold[i]][pred[i]]++
	}
	return m
}

// PerLabel derives each label's figures from a confusion matrix.
func PerLabel(conf [][]int, labels []string) []LabelStats {
	out := make([]LabelStats, len(conf))
	for c := range conf {
		tp := conf[c][c]
		support, predicted := 0, 0
		for j := range conf {
			support += conf[c][j]
			predicted += conf[j][c]
		}
		fp, fn := predicted-tp, support-tp
		out[c] = LabelStats{
			Precision: ratio0(tp, tp+fp),
			Recall:    ratio0(tp, tp+fn),
			F1:        ratio0(2*tp, 2*tp+fp+fn),
			Support:   support,
			Predicted: predicted,
		}
		if c < len(labels) {
			out[c].Label = labels[c]
		}
	}
	return out
}

// MacroF1 is the unweighted mean F1 over the labels that are some record's
// true or predicted label; 0 when there are none.
func MacroF1(stats []LabelStats) float64 {
	var sum float64
	n := 0
	for _, s := range stats {
		if s.Support+s.Predicted == 0 {
			continue
		}
		sum += s.F1
		n++
	}
	if n == 0 {
		return 0
	}
	return sum / float64(n)
}

// binOf is the bin of confidence c among m bins (lo, hi], clamped so that
// 0 falls in the first bin. A NaN goes to the first bin: converting NaN
// to an int is implementation-defined in Go, and the bin must be in range.
func binOf(c float64, m int) int {
	if math.IsNaN(c) {
		return 0
	}
	b := int(math.Ceil(min(max(c, -1), 2)*float64(m))) - 1
	return min(max(b, 0), m-1)
}

// Calibrate computes the reliability table and calibration errors over m
// equal-width bins from each record's prediction and confidence.
func Calibrate(gold, pred []int, conf []float64, m int) Calibration {
	count := make([]int, m)
	right := make([]int, m)
	sum := make([]float64, m)
	for i, c := range conf {
		b := binOf(c, m)
		count[b]++
		sum[b] += c
		if pred[i] == gold[i] {
			right[b]++
		}
	}
	cal := Calibration{Bins: make([]Bin, m)}
	for b := range m {
		bin := Bin{Lo: float64(b) / float64(m), Hi: float64(b+1) / float64(m), Count: count[b],
			Confidence: Fraction(math.NaN()), Accuracy: ratio(right[b], count[b])}
		if count[b] > 0 {
			bin.Confidence = Fraction(sum[b] / float64(count[b]))
			gap := math.Abs(float64(bin.Accuracy) - float64(bin.Confidence))
			cal.ECE += float64(count[b]) / float64(len(conf)) * gap
			cal.MCE = max(cal.MCE, gap)
		}
		cal.Bins[b] = bin
	}
	return cal
}

// ThresholdTables computes the overall and per-label threshold tables at
// the given levels (see Thresholds).
func ThresholdTables(labels []string, gold, pred []int, conf []float64, levels []float64) Thresholds {
	support := make([]int, len(labels))
	predicted := make([]int, len(labels))
	for i := range gold {
		support[gold[i]]++
		predicted[pred[i]]++
	}
	var t Thresholds
	for _, lv := range levels {
		kept, right := 0, 0
		for i, c := range conf {
			if c >= lv {
				kept++
				if pred[i] == gold[i] {
					right++
				}
			}
		}
		t.Overall = append(t.Overall, row(lv, right, kept, len(gold), len(gold)))
	}
	for c, l := range labels {
		lt := LabelThresholds{Label: l}
		for _, lv := range levels {
			kept, right := 0, 0
			for i, cf := range conf {
				if pred[i] == c && cf >= lv {
					kept++
					if gold[i] == c {
						right++
					}
				}
			}
			lt.Rows = append(lt.Rows, row(lv, right, kept, support[c], predicted[c]))
		}
		t.PerLabel = append(t.PerLabel, lt)
	}
	return t
}

// LowestThreshold finds the lowest minimum confidence at which the kept
// records reach precision target and stay at or above it for every higher
// threshold: over all labels when label is negative (the figures of
// Thresholds.Overall), else for that label (those of Thresholds.PerLabel).
// On small sets precision can fall as the threshold rises (a confident
// mistake among few records); a user who picks "at least t" expects every
// threshold above t to keep the target too, so the search walks down from
// the highest confidence and stops at the first threshold that misses.
// With conservative, the threshold must moreover have the lower end of
// precision's 95% Wilson interval at or above target (the higher
// thresholds, with fewer records, need only their precision to). A record is kept when its
// confidence is >= the threshold; every distinct confidence is a
// candidate, not only Levels. A NaN or infinite confidence is refused
// with ErrNotFinite.
func LowestThreshold(gold, pred []int, conf []float64, label int, target float64, conservative bool) (Operating, error) {
	var idx []int
	support := 0
	for i := range gold {
		if !finite(conf[i]) {
			return Operating{}, fmt.Errorf("record %d: %w: confidence %v", i, ErrNotFinite, conf[i])
		}
		if label < 0 || pred[i] == label {
			idx = append(idx, i)
		}
		if label < 0 || gold[i] == label {
			support++
		}
	}
	slices.SortStableFunc(idx, func(a, b int) int {
		switch {
		case conf[a] > conf[b]:
			return -1
		case conf[a] < conf[b]:
			return 1
		}
		return 0
	})
	var op, best Operating
	bestPrec := -1.0
	kept, right := 0, 0
	holding := true // every higher threshold reached the target
	for j := 0; j < len(idx); {
		v := conf[idx[j]]
		// The first record of a group is taken unconditionally, so j
		// advances whatever the values compare like.
		for start := j; j < len(idx) && (j == start || conf[idx[j]] == v); j++ {
			kept++
			if pred[idx[j]] == gold[idx[j]] {
				right++
			}
		}
		lo := 0.0
		if j < len(idx) {
			lo = conf[idx[j]]
		}
		p := float64(right) / float64(kept)
		ci := Wilson(right, kept)
		cur := Operating{Threshold: shortestIn(lo, v), Precision: Fraction(p), Recall: ratio(right, support),
			Coverage: ratio(kept, len(idx)), Kept: kept, PrecisionCI: ci, Few: kept < FewRecords}
		if label < 0 {
			cur.Coverage = ratio(kept, len(gold))
		}
		if p < target {
			holding = false
		}
		meets := p
		if conservative {
			meets = float64(ci.Low)
		}
		if holding && meets >= target {
			cur.Reached = true
			op = cur
		}
		if meets >= bestPrec {
			bestPrec, best = meets, cur
		}
	}
	if op.Reached {
		return op, nil
	}
	if bestPrec < 0 {
		return Operating{Precision: Fraction(math.NaN()), Recall: ratio(0, support), Coverage: Fraction(math.NaN()),
			PrecisionCI: Wilson(0, 0)}, nil
	}
	return best, nil
}

// shortestIn returns the decimal with the fewest digits after the point in
// (lo, hi]; hi itself when none is shorter.
func shortestIn(lo, hi float64) float64 {
	for d := 0; d <= 17; d++ {
		s := math.Pow10(d)
		x := math.Floor(hi*s) / s
		y, err := strconv.ParseFloat(strconv.FormatFloat(x, 'f', d, 64), 64)
		if err == nil && y > lo && y <= hi {
			return y
		}
	}
	return hi
}

// PRPoint is one point of a precision-recall curve: the records whose score
// is >= Threshold count as positive.
type PRPoint struct {
	Threshold float64 `json:"threshold"`
	Precision float64 `json:"precision"`
	Recall    float64 `json:"recall"`
}

// PRCurve returns label's one-vs-rest precision-recall curve, scoring each
// record by its probability for label, with one point per distinct score
// from the highest down, and its average precision
// AP = sum_k (R_k − R_{k−1}) P_k with R_0 = 0 (scikit-learn's
// precision_recall_curve and average_precision_score). Recall and AP are
// undefined (NaN) when no record has the label. A NaN or infinite score
// is refused with ErrNotFinite (a NaN has no place in the ordering).
func PRCurve(gold []int, probs [][]float32, label int) ([]PRPoint, Fraction, error) {
	idx := make([]int, len(gold))
	pos := 0
	for i := range idx {
		if v := float64(probs[i][label]); !finite(v) {
			return nil, 0, fmt.Errorf("record %d: %w: %v for label %d", i, ErrNotFinite, v, label)
		}
		idx[i] = i
		if gold[i] == label {
			pos++
		}
	}
	score := func(i int) float64 { return float64(probs[i][label]) }
	slices.SortStableFunc(idx, func(a, b int) int {
		switch {
		case score(a) > score(b):
			return -1
		case score(a) < score(b):
			return 1
		}
		return 0
	})
	var pts []PRPoint
	var ap, prevR float64
	tp, n := 0, 0
	for j := 0; j < len(idx); {
		v := score(idx[j])
		for start := j; j < len(idx) && (j == start || score(idx[j]) == v); j++ {
			n++
			if gold[idx[j]] == label {
				tp++
			}
		}
		p := float64(tp) / float64(n)
		r := math.NaN()
		if pos > 0 {
			r = float64(tp) / float64(pos)
			ap += (r - prevR) * p
			prevR = r
		}
		pts = append(pts, PRPoint{Threshold: v, Precision: p, Recall: r})
	}
	if pos == 0 {
		return pts, Fraction(math.NaN()), nil
	}
	return pts, Fraction(ap), nil
}

// Spread is a mean and sample standard deviation over folds.
type Spread struct {
	Mean   float64   `json:"mean"`
	Std    float64   `json:"std"`
	Values []float64 `json:"values"`
}

// MeanStd returns the mean and the sample standard deviation (divisor
// n−1; 0 for fewer than two values) of xs.
func MeanStd(xs []float64) Spread {
	s := Spread{Values: slices.Clone(xs)}
	if len(xs) == 0 {
		return s
	}
	for _, x := range xs {
		s.Mean += x
	}
	s.Mean /= float64(len(xs))
	if len(xs) > 1 {
		var ss float64
		for _, x := range xs {
			ss += (x - s.Mean) * (x - s.Mean)
		}
		s.Std = math.Sqrt(ss / float64(len(xs)-1))
	}
	return s
}

// String is "mean ± std" with three decimals.
func (s Spread) String() string { return fmt.Sprintf("%.3f ± %.3f", s.Mean, s.Std) }
