package metrics

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat"
)

const eps = 1e-12

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// oneHot turns predicted labels into probability rows that predict them
// with the given confidence (the rest spread evenly).
func oneHot(pred []int, k int, conf float32) [][]float32 {
	out := make([][]float32, len(pred))
	for i, p := range pred {
		out[i] = make([]float32, k)
		for j := range out[i] {
			out[i][j] = (1 - conf) / float32(k-1)
		}
		out[i][p] = conf
	}
	return out
}

// TestWorkedExamples checks the definitions against published worked
// examples. The figures are quoted from memory of the named sources and
// re-derived by hand in the comments.
func TestWorkedExamples(t *testing.T) {
	t.Run("confusion_matrix", func(t *testing.T) {
		// scikit-learn's documented example for
		// sklearn.metrics.confusion_matrix (from memory):
		// y_true = [2, 0, 2, 2, 0, 1], y_pred = [0, 0, 2, 2, 0, 2] gives
		// [[2, 0, 0], [0, 0, 1], [1, 0, 2]].
		got := Confusion([]int{2, 0, 2, 2, 0, 1}, []int{0, 0, 2, 2, 0, 2}, 3)
		want := [][]int{{2, 0, 0}, {0, 0, 1}, {1, 0, 2}}
		if !slices.EqualFunc(got, want, slices.Equal) {
			t.Errorf("confusion = %v, want %v", got, want)
		}
	})
	t.Run("precision_recall_fscore_support", func(t *testing.T) {
		// scikit-learn's documented example for
		// sklearn.metrics.precision_recall_fscore_support (from memory):
		// y_true = [cat, dog, pig, cat, dog, pig], y_pred = [cat, pig,
		// dog, cat, cat, dog], average="macro" gives (0.22…, 0.33…,
		// 0.26…). By hand: cat P 2/3 R 1 F1 0.8; dog and pig 0.
		labels := []string{"cat", "dog", "pig"}
		gold := []int{0, 1, 2, 0, 1, 2}
		pred := []int{0, 2, 1, 0, 0, 1}
		r, err := Evaluate(labels, gold, oneHot(pred, 3, 0.9), Options{})
		if err != nil {
			t.Fatal(err)
		}
		var mp, mr float64
		for _, s := range r.PerLabel {
			mp += s.Precision / 3
			mr += s.Recall / 3
		}
		if !near(mp, 2.0/9, eps) || !near(mr, 1.0/3, eps) || !near(r.MacroF1, 0.8/3, eps) {
			t.Errorf("macro P %v R %v F1 %v, want 0.2222 0.3333 0.2667", mp, mr, r.MacroF1)
		}
		if s := r.PerLabel[0]; !near(s.Precision, 2.0/3, eps) || s.Recall != 1 || !near(s.F1, 0.8, eps) || s.Support != 2 || s.Predicted != 3 {
			t.Errorf("cat = %+v", s)
		}
		if !near(r.Accuracy, 2.0/6, eps) {
			t.Errorf("accuracy = %v, want 1/3", r.Accuracy)
		}
	})
	t.Run("IIR table 13.8", func(t *testing.T) {
		// Manning, Raghavan and Schütze (2008), "Introduction to
		// Information Retrieval", section 13.6, Table 13.8 (from memory):
		// class 1 TP 10 FP 10 FN 10, class 2 TP 90 FP 10 FN 10;
		// macroaveraged precision (0.5 + 0.9) / 2 = 0.7, microaveraged
		// 100 / 120 ≈ 0.83. Here the two classes sit in a single-label
		// matrix beside a third "rest" class that takes the errors, so
		// that each of the two has exactly the book's contingency table
		// (TN 970 and 890 of 1,000 documents).
		conf := [][]int{
			{10, 0, 10},
			{0, 90, 10},
			{10, 10, 860},
		}
		st := PerLabel(conf, []string{"c1", "c2", "rest"})
		if !near(st[0].Precision, 0.5, eps) || !near(st[1].Precision, 0.9, eps) {
			t.Fatalf("precision = %v, %v; want 0.5, 0.9", st[0].Precision, st[1].Precision)
		}
		if m := (st[0].Precision + st[1].Precision) / 2; !near(m, 0.7, eps) {
			t.Errorf("macro precision = %v, want 0.7", m)
		}
		tp := conf[0][0] + conf[1][1]
		if m := float64(tp) / float64(st[0].Predicted+st[1].Predicted); !near(m, 100.0/120, eps) {
			t.Errorf("micro precision = %v, want 0.833", m)
		}
		n := 0
		for _, row := range conf {
			for _, v := range row {
				n += v
			}
		}
		if tn := n - st[0].Support - st[0].Predicted + conf[0][0]; n != 1000 || tn != 970 {
			t.Errorf("class 1 TN = %d of %d, want 970 of 1000", tn, n)
		}
	})
	t.Run("average_precision_score", func(t *testing.T) {
		// scikit-learn's documented example for average_precision_score
		// and precision_recall_curve (from memory): y_true = [0, 0, 1, 1],
		// scores [0.1, 0.4, 0.35, 0.8]: AP 0.83…, precision
		// [0.5, 0.667, 0.5, 1] and recall [1, 1, 0.5, 0.5] at thresholds
		// [0.1, 0.35, 0.4, 0.8].
		gold := []int{0, 0, 1, 1}
		var probs [][]float32
		for _, s := range []float32{0.1, 0.4, 0.35, 0.8} {
			probs = append(probs, []float32{1 - s, s})
		}
		pts, ap, err := PRCurve(gold, probs, 1)
		if err != nil {
			t.Fatal(err)
		}
		if !near(float64(ap), 0.5+0.5*2.0/3, 1e-12) {
			t.Errorf("AP = %v, want 0.8333", ap)
		}
		wantP := []float64{1, 0.5, 2.0 / 3, 0.5}
		wantR := []float64{0.5, 0.5, 1, 1}
		wantT := []float32{0.8, 0.4, 0.35, 0.1}
		if len(pts) != 4 {
			t.Fatalf("%d points, want 4", len(pts))
		}
		for i, p := range pts {
			if !near(p.Precision, wantP[i], eps) || !near(p.Recall, wantR[i], eps) || p.Threshold != float64(wantT[i]) {
				t.Errorf("point %d = %+v, want P %v R %v at %v", i, p, wantP[i], wantR[i], wantT[i])
			}
		}
	})
	t.Run("standard deviation", func(t *testing.T) {
		// The textbook data 2, 4, 4, 4, 5, 5, 7, 9 (mean 5, squared
		// deviations summing to 32; population σ = 2, sample
		// s = sqrt(32/7)), checked also against gonum's stat.MeanStdDev,
		// which uses the unbiased (n−1) estimator.
		xs := []float64{2, 4, 4, 4, 5, 5, 7, 9}
		s := MeanStd(xs)
		m, sd := stat.MeanStdDev(xs, nil)
		if s.Mean != 5 || !near(s.Std, math.Sqrt(32.0/7), eps) || !near(s.Mean, m, eps) || !near(s.Std, sd, eps) {
			t.Errorf("MeanStd = %v ± %v, want 5 ± %v (gonum %v ± %v)", s.Mean, s.Std, math.Sqrt(32.0/7), m, sd)
		}
		if got := s.String(); got != "5.000 ± 2.138" {
			t.Errorf("String = %q", got)
		}
	})
}

// TestCalibration checks ECE against its definition in Guo et al. (2017),
// "On Calibration of Modern Neural Networks", eq. 3, on a set small enough
// to do by hand, including the bin convention ((m−1)/M, m/M] at an edge.
func TestCalibration(t *testing.T) {
	// Confidences and whether the prediction is right:
	//  0.95 ✓, 0.95 ✓, 0.92 ✗, 0.8 (edge: bin (0.7, 0.8]) ✓, 0.75 ✗, 0.55 ✓
	// Bin (0.9,1]: 3 records, accuracy 2/3, mean confidence 0.94: gap 0.2733…
	// Bin (0.7,0.8]: 2 records, accuracy 1/2, mean 0.775: gap 0.275
	// Bin (0.5,0.6]: 1 record, accuracy 1, mean 0.55: gap 0.45
	// ECE = (3·0.27333 + 2·0.275 + 1·0.45) / 6; MCE = 0.45.
	conf := []float64{0.95, 0.95, 0.92, 0.8, 0.75, 0.55}
	gold := []int{0, 0, 0, 0, 0, 0}
	pred := []int{0, 0, 1, 0, 1, 0}
	cal := Calibrate(gold, pred, conf, 10)
	g1 := math.Abs(2.0/3 - (0.95+0.95+0.92)/3)
	g2 := math.Abs(0.5 - (0.8+0.75)/2)
	g3 := math.Abs(1 - 0.55)
	want := (3*g1 + 2*g2 + g3) / 6
	if !near(cal.ECE, want, 1e-12) || !near(cal.MCE, g3, 1e-12) {
		t.Errorf("ECE %v MCE %v, want %v %v", cal.ECE, cal.MCE, want, g3)
	}
	counts := make([]int, 10)
	for i, b := range cal.Bins {
		counts[i] = b.Count
		if b.Count == 0 && (b.Accuracy.Defined() || b.Confidence.Defined()) {
			t.Errorf("empty bin %d has figures %+v", i, b)
		}
	}
	if want := []int{0, 0, 0, 0, 0, 1, 0, 2, 0, 3}; !slices.Equal(counts, want) {
		t.Errorf("bin counts %v, want %v", counts, want)
	}
	// A perfectly calibrated set: every bin's accuracy equals its
	// confidence exactly.
	conf = []float64{0.75, 0.75, 0.75, 0.75, 1, 1}
	pred = []int{0, 0, 0, 1, 0, 0}
	if cal := Calibrate(gold, pred, conf, 10); cal.ECE != 0 {
		t.Errorf("calibrated set: ECE %v, want 0", cal.ECE)
	}
}

func TestThresholds(t *testing.T) {
	labels := []string{"a", "b"}
	// Records: true label, predicted label, confidence.
	gold := []int{0, 0, 0, 1, 1, 0, 0}
	pred := []int{0, 0, 1, 1, 1, 0, 1}
	conf := []float64{0.98, 0.7, 0.9, 0.6, 0.52, 0.5342, 0.45}
	tt := ThresholdTables(labels, gold, pred, conf, []float64{0.5, 0.7, 0.99})
	type fig struct {
		p, r, c float64
		kept    int
	}
	check := func(name string, row ThresholdRow, w fig) {
		t.Helper()
		if row.Kept != w.kept || !near(float64(row.Precision), w.p, eps) || !near(float64(row.Recall), w.r, eps) || !near(float64(row.Coverage), w.c, eps) {
			t.Errorf("%s at %v = %+v, want %+v", name, row.Threshold, row, w)
		}
	}
	// Overall at 0.5: all but 0.45 kept, 5 of them right, of 7 records.
	check("overall", tt.Overall[0], fig{5.0 / 6, 5.0 / 7, 6.0 / 7, 6})
	// At 0.7: 0.98 right, 0.7 right, 0.9 wrong.
	check("overall", tt.Overall[1], fig{2.0 / 3, 2.0 / 7, 3.0 / 7, 3})
	if r := tt.Overall[2]; r.Kept != 0 || r.Precision.Defined() || !near(float64(r.Coverage), 0, eps) {
		t.Errorf("overall at 0.99 = %+v, want nothing kept and no precision", r)
	}
	// Label a: support 5; predicted a at 0.98, 0.7, 0.5342, all right.
	check("a", tt.PerLabel[0].Rows[1], fig{1, 2.0 / 5, 2.0 / 3, 2})
	// Label b: support 2; predicted b at 0.9 (wrong), 0.6, 0.52, 0.45 (wrong).
	check("b", tt.PerLabel[1].Rows[0], fig{2.0 / 3, 1, 3.0 / 4, 3})
	check("b", tt.PerLabel[1].Rows[1], fig{0, 0, 1.0 / 4, 1})

	// Overall, by falling confidence: 0.98 right (precision 1/1), 0.9
	// wrong (1/2), 0.7 (2/3), 0.6 (3/4), 0.5342 (4/5), 0.52 (5/6), 0.45
	// wrong (5/7). Label b: 0.9 wrong (0/1), 0.6 (1/2), 0.52 (2/3), 0.45
	// wrong (2/4).
	for _, c := range []struct {
		label         int
		target        float64
		conservative  bool
		reached       bool
		thr           float64
		kept          int
		recall, cover float64
	}{
		// 0.8 is reached at 0.52 (5/6) but missed at 0.9 (1/2): a user
		// who picks "at least t" must keep the target at every higher
		// threshold, so only 0.98 alone qualifies; (0.9, 0.98] gives 0.98.
		{-1, 0.8, false, true, 0.98, 1, 1.0 / 7, 1.0 / 7},
		{-1, 0.84, false, true, 0.98, 1, 1.0 / 7, 1.0 / 7},
		// 0.5 holds all the way down: every record, (0, 0.45] gives 0.4.
		{-1, 0.5, false, true, 0.4, 7, 5.0 / 7, 1},
		// Label b's most confident prediction is wrong: 0.6 is never held
		// from the top; the best, 2/3, from the lowest threshold giving it.
		{1, 0.6, false, false, 0.5, 3, 1, 3.0 / 4},
		{1, 0.7, false, false, 0.5, 3, 1, 3.0 / 4},
		// Every a prediction is right: (0, 0.5342] gives 0.5.
		{0, 1, false, true, 0.5, 3, 3.0 / 5, 1},
		// Conservative: 3 of 3 right has a Wilson lower end of 0.438, so
		// 0.5 is not reached; the best lower end is at 3 records. 0.4 is
		// (1 of 1 has 0.207, but there only precision must hold).
		{0, 0.5, true, false, 0.5, 3, 3.0 / 5, 1},
		{0, 0.4, true, true, 0.5, 3, 3.0 / 5, 1},
	} {
		op, err := LowestThreshold(gold, pred, conf, c.label, c.target, c.conservative)
		if err != nil {
			t.Fatal(err)
		}
		if op.Reached != c.reached || op.Threshold != c.thr || op.Kept != c.kept || !near(float64(op.Recall), c.recall, eps) || !near(float64(op.Coverage), c.cover, eps) {
			t.Errorf("label %d target %v: %+v, want reached %v threshold %v kept %d recall %v coverage %v",
				c.label, c.target, op, c.reached, c.thr, c.kept, c.recall, c.cover)
		}
		// The threshold, applied as tag applies it, keeps exactly Kept.
		kept := 0
		for i, cf := range conf {
			if (c.label < 0 || pred[i] == c.label) && cf >= op.Threshold {
				kept++
			}
		}
		if kept != op.Kept {
			t.Errorf("label %d target %v: threshold %v keeps %d, reported %d", c.label, c.target, op.Threshold, kept, op.Kept)
		}
	}
}

func TestShortestIn(t *testing.T) {
	for _, c := range []struct{ lo, hi, want float64 }{
		{0.8612, 0.87345, 0.87},
		{0.5, 0.52, 0.52},
		{0, 0.34, 0.3},
		{0.9, 0.98, 0.98},
		{0.45, 0.52, 0.5},
		{0.99, 1, 1},
		{0.123455, 0.123456, 0.123456},
	} {
		if got := shortestIn(c.lo, c.hi); got != c.want {
			t.Errorf("shortestIn(%v, %v) = %v, want %v", c.lo, c.hi, got, c.want)
		}
	}
}

func TestEvaluateErrors(t *testing.T) {
	for _, c := range []struct {
		name  string
		gold  []int
		probs [][]float32
	}{
		{"empty", nil, nil},
		{"rows", []int{0, 1}, [][]float32{{1, 0}}},
		{"width", []int{0}, [][]float32{{1, 0, 0}}},
		{"gold", []int{2}, [][]float32{{1, 0}}},
		{"negative", []int{-1}, [][]float32{{1, 0}}},
	} {
		if _, err := Evaluate([]string{"a", "b"}, c.gold, c.probs, Options{}); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
}

func TestFractionJSON(t *testing.T) {
	b, err := json.Marshal([]Fraction{0.25, Fraction(math.NaN())})
	if err != nil || string(b) != "[0.25,null]" {
		t.Fatalf("marshal = %s, %v", b, err)
	}
	var back []Fraction
	if err := json.Unmarshal(b, &back); err != nil || back[0] != 0.25 || back[1].Defined() {
		t.Errorf("unmarshal = %v, %v", back, err)
	}
}

// randomSet makes a seeded evaluation set whose probabilities lean towards
// the true label, with some ties and a label (the last) that never occurs.
func randomSet(n, k int, seed uint64) ([]int, [][]float32) {
	rng := rand.New(rand.NewPCG(seed, 1))
	gold := make([]int, n)
	probs := make([][]float32, n)
	for i := range n {
		gold[i] = rng.IntN(k - 1)
		row := make([]float32, k)
		var sum float32
		for j := range k - 1 {
			row[j] = float32(rng.ExpFloat64())
			if j == gold[i] {
				row[j] += float32(2 * rng.Float64())
			}
			sum += row[j]
		}
		for j := range row {
			row[j] /= sum
		}
		if i%17 == 0 { // a tie, to check the lowest-index rule
			row[1] = row[0]
		}
		probs[i] = row
	}
	return gold, probs
}

// TestAgainstScikitLearn compares every figure with scikit-learn (Debian's
// python3-sklearn): accuracy_score, f1_score(average="macro"),
// precision_recall_fscore_support, confusion_matrix, calibration_curve on
// the correctness of the top label (its uniform bins are ((m−1)/M, m/M] as
// in Guo et al.), precision_recall_curve and average_precision_score. It
// fails under CI=true when scikit-learn is missing.
func TestAgainstScikitLearn(t *testing.T) {
	const py = "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import sklearn").Run(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("scikit-learn (python3-sklearn) is required under CI=true: %v", err)
		}
		t.Skipf("scikit-learn not available: %v", err)
	}
	const k = 5
	gold, probs := randomSet(600, k, 3)
	in, _ := json.Marshal(map[string]any{"labels": k, "gold": gold, "probs": float64s(probs)})
	cmd := exec.Command(py, "testdata/sklearn_check.py")
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("sklearn_check.py: %v\n%s", err, stderr.String())
	}
	var ref struct {
		Accuracy              float64 `json:"accuracy"`
		MacroF1x              float64 `json:"macro_f1"`
		Precision, Recall, F1 []float64
		Support               []int
		Confusion             [][]int
		BinAccuracy           []float64 `json:"bin_accuracy"`
		BinConfidence         []float64 `json:"bin_confidence"`
		PR                    []*struct {
			Precision, Recall, Thresholds []float64
			AP                            float64
		} `json:"pr"`
	}
	if err := json.Unmarshal(out, &ref); err != nil {
		t.Fatal(err)
	}
	labels := []string{"a", "b", "c", "d", "never"}
	r, err := Evaluate(labels, gold, probs, Options{})
	if err != nil {
		t.Fatal(err)
	}
	const tol = 1e-9
	if !near(r.Accuracy, ref.Accuracy, tol) || !near(r.MacroF1, ref.MacroF1x, tol) {
		t.Errorf("accuracy %v macro-F1 %v, sklearn %v %v", r.Accuracy, r.MacroF1, ref.Accuracy, ref.MacroF1x)
	}
	if !slices.EqualFunc(r.Confusion, ref.Confusion, slices.Equal) {
		t.Errorf("confusion %v, sklearn %v", r.Confusion, ref.Confusion)
	}
	for c, s := range r.PerLabel {
		if !near(s.Precision, ref.Precision[c], tol) || !near(s.Recall, ref.Recall[c], tol) || !near(s.F1, ref.F1[c], tol) || s.Support != ref.Support[c] {
			t.Errorf("label %d: %+v, sklearn P %v R %v F1 %v support %d", c, s, ref.Precision[c], ref.Recall[c], ref.F1[c], ref.Support[c])
		}
	}
	var accs, confs []float64
	for _, b := range r.Calibration.Bins {
		if b.Count > 0 {
			accs = append(accs, float64(b.Accuracy))
			confs = append(confs, float64(b.Confidence))
		}
	}
	if !slices.EqualFunc(accs, ref.BinAccuracy, func(a, b float64) bool { return near(a, b, tol) }) ||
		!slices.EqualFunc(confs, ref.BinConfidence, func(a, b float64) bool { return near(a, b, tol) }) {
		t.Errorf("reliability: accuracy %v confidence %v\nsklearn accuracy %v confidence %v", accs, confs, ref.BinAccuracy, ref.BinConfidence)
	}
	for c := range k {
		pts, ap, err := PRCurve(gold, probs, c)
		if err != nil {
			t.Fatal(err)
		}
		rp := ref.PR[c]
		if rp == nil {
			if ap.Defined() {
				t.Errorf("label %d has no support but AP %v", c, ap)
			}
			continue
		}
		if !near(float64(ap), rp.AP, tol) || !near(float64(r.PerLabel[c].AveragePrecision), rp.AP, tol) {
			t.Errorf("label %d: AP %v, sklearn %v", c, ap, rp.AP)
		}
		// scikit-learn lists thresholds in increasing order, then a final
		// (precision 1, recall 0) point; it may stop below the first
		// threshold that reaches full recall. Every point it gives must
		// be ours.
		byThr := map[float64]PRPoint{}
		for _, p := range pts {
			byThr[p.Threshold] = p
		}
		for i, th := range rp.Thresholds {
			p, ok := byThr[th]
			if !ok || !near(p.Precision, rp.Precision[i], tol) || !near(p.Recall, rp.Recall[i], tol) {
				t.Errorf("label %d threshold %v: ours %+v (%v), sklearn P %v R %v", c, th, p, ok, rp.Precision[i], rp.Recall[i])
				break
			}
		}
	}
}

func float64s(p [][]float32) [][]float64 {
	out := make([][]float64, len(p))
	for i, r := range p {
		out[i] = make([]float64, len(r))
		for j, v := range r {
			// Exactly the float32 value: JSON carries it in full, so
			// both sides see the same number.
			out[i][j] = float64(v)
		}
	}
	return out
}
