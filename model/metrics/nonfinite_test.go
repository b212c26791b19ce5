package metrics

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"os/exec"
	"strings"
	"testing"
)

// nonFiniteCases are probability sets with one NaN or infinite value, in
// the first record, the last, or several.
var nonFiniteCases = []struct {
	name  string
	gold  []int
	probs [][]float32
}{
	{"nan first", []int{0, 1, 1}, [][]float32{{nan32(), 0.5}, {0.3, 0.7}, {0.2, 0.8}}},
	{"nan in the scored label", []int{0, 1, 1}, [][]float32{{0.6, 0.4}, {0.3, nan32()}, {0.2, 0.8}}},
	{"all nan", []int{0, 1}, [][]float32{{nan32(), nan32()}, {nan32(), nan32()}}},
	{"+inf", []int{0, 1}, [][]float32{{0.6, 0.4}, {float32(math.Inf(1)), 0.5}}},
	{"-inf", []int{0, 1}, [][]float32{{0.6, float32(math.Inf(-1))}, {0.3, 0.7}}},
}

func nan32() float32 { return float32(math.NaN()) }

// TestNonFiniteRefused: a NaN or infinite probability is refused by every
// function that orders scores, instead of looping for ever (a NaN never
// equals itself, so grouping equal scores never advanced past it).
func TestNonFiniteRefused(t *testing.T) {
	for _, c := range nonFiniteCases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Evaluate([]string{"a", "b"}, c.gold, c.probs, Options{TargetPrecision: 0.9})
			if !errors.Is(err, ErrNotFinite) || !strings.Contains(err.Error(), "record ") {
				t.Errorf("Evaluate: %v, want ErrNotFinite naming the record", err)
			}
			bad := false
			for label := range 2 {
				_, _, err := PRCurve(c.gold, c.probs, label)
				hasBad := false
				for _, row := range c.probs {
					hasBad = hasBad || !finite(float64(row[label]))
				}
				bad = bad || hasBad
				if hasBad != errors.Is(err, ErrNotFinite) {
					t.Errorf("PRCurve label %d: %v (non-finite score: %v)", label, err, hasBad)
				}
			}
			if !bad {
				t.Fatal("case has no non-finite value")
			}
			pred := make([]int, len(c.gold))
			conf := make([]float64, len(c.gold))
			for i, row := range c.probs {
				pred[i], conf[i] = Predict(row)
				conf[i] = float64(row[0]) // a confidence taken as is, NaN included
			}
			hasBad := false
			for _, v := range conf {
				hasBad = hasBad || !finite(v)
			}
			for _, label := range []int{-1, 0, 1} {
				_, err := LowestThreshold(c.gold, pred, conf, label, 0.9, false)
				if hasBad != errors.Is(err, ErrNotFinite) {
					t.Errorf("LowestThreshold label %d: %v (non-finite confidence: %v)", label, err, hasBad)
				}
			}
			// The figures that do not order scores stay bounded: every
			// record lands in a bin.
			cal := Calibrate(c.gold, pred, conf, Bins)
			n := 0
			for _, b := range cal.Bins {
				n += b.Count
			}
			if n != len(c.gold) || len(cal.Bins) != Bins {
				t.Errorf("Calibrate: %d records in %d bins, want %d in %d", n, len(cal.Bins), len(c.gold), Bins)
			}
		})
	}
}

// TestNonFiniteSklearnRefuses checks the decision against the reference:
// scikit-learn's average_precision_score (Debian's python3-sklearn) raises
// ValueError on the same scores rather than ranking a NaN or infinity.
func TestNonFiniteSklearnRefuses(t *testing.T) {
	const py = "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import sklearn").Run(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("scikit-learn (python3-sklearn) is required under CI=true: %v", err)
		}
		t.Skipf("scikit-learn not available: %v", err)
	}
	const script = `
import json, sys
from sklearn.metrics import average_precision_score
d = json.load(sys.stdin)
y = [1 if g == 1 else 0 for g in d["gold"]]
s = [float(x) for x in d["scores"]]
try:
    average_precision_score(y, s)
    print("accepted")
except ValueError as e:
    print("refused")
`
	for _, c := range nonFiniteCases {
		scores := make([]string, len(c.probs))
		for i, row := range c.probs {
			v := float64(row[1])
			if !finite(float64(row[0])) { // put the bad value where sklearn sees it
				v = float64(row[0])
			}
			switch {
			case math.IsNaN(v):
				scores[i] = `"nan"`
			case math.IsInf(v, 1):
				scores[i] = `"inf"`
			case math.IsInf(v, -1):
				scores[i] = `"-inf"`
			default:
				b, _ := json.Marshal(v)
				scores[i] = string(b)
			}
		}
		gold, _ := json.Marshal(c.gold)
		cmd := exec.Command(py, "-c", script)
		cmd.Stdin = strings.NewReader(`{"gold":` + string(gold) + `,"scores":[` + strings.Join(scores, ",") + `]}`)
		out, err := cmd.Output()
		if err != nil {
			t.Fatalf("%s: python: %v", c.name, err)
		}
		if got := strings.TrimSpace(string(out)); got != "refused" {
			t.Errorf("%s: scikit-learn %s the scores; we refuse them", c.name, got)
		}
	}
}
