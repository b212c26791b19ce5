package metrics

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"testing"
)

// TestScoreSetsWorked checks the multi-label figures against worked
// examples. The first two are the docstring examples of scikit-learn's
// hamming_loss and accuracy_score (from memory): true [[0,1],[1,1]]
// against all zeros has a Hamming loss of 0.75, and against all ones a
// subset accuracy of 0.5. The third is worked by hand here: three records,
// labels A B C, true {A,B} {B} {}, predicted {A} {B,C} {C}: TP A1 B1 C0, FP
// A0 B0 C2, FN A0 B1 C0; micro P = 2/4, R = 2/3, F1 = 4/7; per label P
// 1 1 0, R 1 1/2 0, F1 1 2/3 0, so macro P 2/3, R 1/2, F1 5/9; Hamming
// loss 3 wrong of 9 pairs; no set exact, subset accuracy 0.
func TestScoreSetsWorked(t *testing.T) {
	b := func(rows ...[]int) [][]bool {
		out := make([][]bool, len(rows))
		for i, r := range rows {
			for _, v := range r {
				out[i] = append(out[i], v == 1)
			}
		}
		return out
	}
	s, err := ScoreSets(nil, b([]int{0, 1}, []int{1, 1}), b([]int{0, 0}, []int{0, 0}))
	if err != nil || s.HammingLoss != 0.75 {
		t.Errorf("hamming loss %v (%v), want 0.75", s.HammingLoss, err)
	}
	s, _ = ScoreSets(nil, b([]int{0, 1}, []int{1, 1}), b([]int{1, 1}, []int{1, 1}))
	if s.SubsetAccuracy != 0.5 {
		t.Errorf("subset accuracy %v, want 0.5", s.SubsetAccuracy)
	}
	s, _ = ScoreSets([]string{"A", "B", "C"}, b([]int{1, 1, 0}, []int{0, 1, 0}, []int{0, 0, 0}), b([]int{1, 0, 0}, []int{0, 1, 1}, []int{0, 0, 1}))
	near := func(what string, got, want float64) {
		if math.Abs(got-want) > 1e-12 {
			t.Errorf("%s = %v, want %v", what, got, want)
		}
	}
	near("micro precision", s.Micro.Precision, 0.5)
	near("micro recall", s.Micro.Recall, 2.0/3)
	near("micro F1", s.Micro.F1, 4.0/7)
	near("macro precision", s.Macro.Precision, 2.0/3)
	near("macro recall", s.Macro.Recall, 0.5)
	near("macro F1", s.Macro.F1, 5.0/9)
	near("hamming loss", s.HammingLoss, 3.0/9)
	near("subset accuracy", s.SubsetAccuracy, 0)
	if s.PerLabel[1].Support != 2 || s.PerLabel[2].Predicted != 2 || s.PerLabel[1].Label != "B" {
		t.Errorf("per label %+v", s.PerLabel)
	}
}

// randomMulti draws n records of k labels: label k-1 never occurs, the
// others with rising frequency, and probabilities that lean towards the
// truth, on a grid of 0.05 so that ties occur.
func randomMulti(n, k int, seed uint64) ([][]bool, [][]float32) {
	rng := rand.New(rand.NewPCG(seed, 11))
	gold, probs := make([][]bool, n), make([][]float32, n)
	for i := range n {
		gold[i], probs[i] = make([]bool, k), make([]float32, k)
		for c := range k {
			gold[i][c] = c < k-1 && rng.Float64() < 0.15*float64(c+1)
			p := rng.Float64() * 0.7
			if gold[i][c] {
				p += 0.3
			}
			probs[i][c] = float32(math.Round(p*20) / 20)
		}
	}
	return gold, probs
}

// TestMultiAgainstScikitLearn compares every multi-label figure with
// scikit-learn (Debian's python3-sklearn, testdata/sklearn_multilabel.py):
// accuracy_score and hamming_loss on indicator matrices,
// precision_recall_fscore_support (micro, macro and per label,
// zero_division=0), precision_recall_curve and average_precision_score per
// label, and the best-F1 threshold among the curve's thresholds. It fails
// under CI=true when scikit-learn is missing.
func TestMultiAgainstScikitLearn(t *testing.T) {
	const py = "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import sklearn").Run(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("scikit-learn (python3-sklearn) is required under CI=true: %v", err)
		}
		t.Skipf("scikit-learn not available: %v", err)
	}
	const k = 5
	gold, probs := randomMulti(400, k, 5)
	th := []float64{0.5, 0.35, 0.6, 0.45, 0.5}
	g01 := make([][]int, len(gold))
	for i, r := range gold {
		for _, v := range r {
			x := 0
			if v {
				x = 1
			}
			g01[i] = append(g01[i], x)
		}
	}
	// The thresholds as float32, so that ">=" compares the same values.
	th32 := make([]float64, k)
	for c, v := range th {
		th32[c] = float64(float32(v))
	}
	in, _ := json.Marshal(map[string]any{"gold": g01, "probs": float64s(probs), "thresholds": th32})
	cmd := exec.Command(py, "testdata/sklearn_multilabel.py")
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("sklearn_multilabel.py: %v\n%s", err, stderr.String())
	}
	var ref struct {
		SubsetAccuracy float64 `json:"subset_accuracy"`
		HammingLoss    float64 `json:"hamming_loss"`
		Micro, Macro   PRF
		PerLabel       struct {
			Precision, Recall, F1 []float64
			Support               []int
		} `json:"per_label"`
		PR []*struct {
			Precision, Recall, Thresholds []float64
			AP                            float64
			BestF1                        float64 `json:"best_f1"`
			BestF1Threshold               float64 `json:"best_f1_threshold"`
		} `json:"pr"`
	}
	if err := json.Unmarshal(out, &ref); err != nil {
		t.Fatal(err)
	}
	labels := []string{"a", "b", "c", "d", "never"}
	r, err := EvaluateMulti(labels, gold, probs, th32, Options{TargetPrecision: 0.8})
	if err != nil {
		t.Fatal(err)
	}
	near := func(what string, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-12 {
			t.Errorf("%s = %v, scikit-learn %v", what, got, want)
		}
	}
	near("subset accuracy", r.SubsetAccuracy, ref.SubsetAccuracy)
	near("hamming loss", r.HammingLoss, ref.HammingLoss)
	near("micro precision", r.Micro.Precision, ref.Micro.Precision)
	near("micro recall", r.Micro.Recall, ref.Micro.Recall)
	near("micro F1", r.Micro.F1, ref.Micro.F1)
	near("macro precision", r.Macro.Precision, ref.Macro.Precision)
	near("macro recall", r.Macro.Recall, ref.Macro.Recall)
	near("macro F1", r.Macro.F1, ref.Macro.F1)
	for c, s := range r.PerLabel {
		near(s.Label+" precision", s.Precision, ref.PerLabel.Precision[c])
		near(s.Label+" recall", s.Recall, ref.PerLabel.Recall[c])
		near(s.Label+" F1", s.F1, ref.PerLabel.F1[c])
		if s.Support != ref.PerLabel.Support[c] {
			t.Errorf("%s support %d, scikit-learn %d", s.Label, s.Support, ref.PerLabel.Support[c])
		}
		rp := ref.PR[c]
		if rp == nil {
			if s.AveragePrecision.Defined() {
				t.Errorf("%s: AP %v without positives, scikit-learn none", s.Label, s.AveragePrecision)
			}
			continue
		}
		near(s.Label+" AP", float64(s.AveragePrecision), rp.AP)
		// scikit-learn lists thresholds ascending, the last point
		// (precision 1, recall 0) without one; ours run descending.
		pts := r.Curves[c].Points
		if len(pts) != len(rp.Thresholds) {
			t.Errorf("%s: %d curve points, scikit-learn %d", s.Label, len(pts), len(rp.Thresholds))
			continue
		}
		for i, p := range pts {
			j := len(pts) - 1 - i
			near(s.Label+" curve threshold", p.Threshold, rp.Thresholds[j])
			near(s.Label+" curve precision", p.Precision, rp.Precision[j])
			near(s.Label+" curve recall", p.Recall, rp.Recall[j])
		}
		g := make([]bool, len(gold))
		score := make([]float64, len(gold))
		for i := range gold {
			g[i], score[i] = gold[i][c], float64(probs[i][c])
		}
		bt, bf, ok, err := BestF1Threshold(g, score)
		if err != nil || !ok {
			t.Fatalf("%s: BestF1Threshold: %v %v", s.Label, ok, err)
		}
		near(s.Label+" best F1", bf, rp.BestF1)
		// Ours is the shortest decimal keeping the same records: in
		// (next lower score, scikit-learn's threshold].
		if bt > rp.BestF1Threshold || !(bt > nextBelow(score, rp.BestF1Threshold)) {
			t.Errorf("%s: best-F1 threshold %v, scikit-learn %v", s.Label, bt, rp.BestF1Threshold)
		}
		// The target's threshold keeps precision >= 0.8 at it and above.
		if op := r.Target.PerLabel[c]; op.Reached {
			for _, p := range pts {
				if p.Threshold >= op.Threshold && p.Precision < 0.8 {
					t.Errorf("%s: target threshold %v, but precision %v at %v", s.Label, op.Threshold, p.Precision, p.Threshold)
				}
			}
		}
	}
}

// nextBelow is the largest score below x, or -1.
func nextBelow(score []float64, x float64) float64 {
	best := -1.0
	for _, s := range score {
		if s < x && s > best {
			best = s
		}
	}
	return best
}

func TestBestF1ThresholdEdges(t *testing.T) {
	if _, _, ok, err := BestF1Threshold([]bool{false, false}, []float64{0.2, 0.9}); ok || err != nil {
		t.Errorf("no positives: ok %v err %v", ok, err)
	}
	if _, _, _, err := BestF1Threshold([]bool{true}, []float64{math.NaN()}); err == nil {
		t.Error("NaN score accepted")
	}
	// Positives at 0.9 and 0.7, a negative at 0.8: keeping all three gives
	// F1 2*2/(3+2) = 0.8, keeping only 0.9 gives 2/(1+2) = 0.667.
	th, f1, ok, _ := BestF1Threshold([]bool{true, false, true}, []float64{0.9, 0.8, 0.7})
	if !ok || math.Abs(f1-0.8) > 1e-12 || th <= 0 || th > 0.7 {
		t.Errorf("threshold %v F1 %v, want F1 0.8 at a threshold in (0, 0.7]", th, f1)
	}
}
