package metrics

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"testing"
)

// TestWilsonClosedForms checks the interval against facts that follow from
// its definition: for k = 0 the upper end is z²/(n + z²) (Newcombe 1998,
// method 3, with p = 0), and the interval of n−k is the mirror of that of k.
func TestWilsonClosedForms(t *testing.T) {
	for _, n := range []int{1, 2, 10, 30, 263, 10000} {
		ci := Wilson(0, n)
		want := z95 * z95 / (float64(n) + z95*z95)
		if ci.Low != 0 || math.Abs(float64(ci.High)-want) > 1e-12 {
			t.Errorf("Wilson(0, %d) = %+v, want [0, %v]", n, ci, want)
		}
		for k := 0; k <= n && k < 50; k++ {
			a, b := Wilson(k, n), Wilson(n-k, n)
			if math.Abs(float64(a.Low)-(1-float64(b.High))) > 1e-12 || math.Abs(float64(a.High)-(1-float64(b.Low))) > 1e-12 {
				t.Errorf("Wilson(%d, %d) = %+v is not the mirror of Wilson(%d, %d) = %+v", k, n, a, n-k, n, b)
			}
			p := float64(k) / float64(n)
			if float64(a.Low) > p || float64(a.High) < p {
				t.Errorf("Wilson(%d, %d) = %+v does not hold %v", k, n, a, p)
			}
		}
	}
	if ci := Wilson(0, 0); ci.Low.Defined() || ci.High.Defined() {
		t.Errorf("Wilson(0, 0) = %+v, want undefined", ci)
	}
}

// TestWilsonAgainstSciPy compares with SciPy's
// scipy.stats.binomtest(k, n).proportion_ci(method="wilson") (Debian's
// python3-scipy, which python3-sklearn depends on) to 1e-12.
func TestWilsonAgainstSciPy(t *testing.T) {
	const py = "/usr/bin/python3"
	if err := exec.Command(py, "-c", "from scipy.stats import binomtest").Run(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("SciPy (python3-scipy) is required under CI=true: %v", err)
		}
		t.Skipf("SciPy not available: %v", err)
	}
	var cases [][2]int
	for _, n := range []int{1, 2, 3, 7, 10, 29, 30, 31, 100, 263, 1000} {
		for _, k := range []int{0, 1, n / 3, n / 2, n - 1, n} {
			if k >= 0 && k <= n {
				cases = append(cases, [2]int{k, n})
			}
		}
	}
	in, _ := json.Marshal(cases)
	script := `
import json, sys
from scipy.stats import binomtest
out = []
for k, n in json.load(sys.stdin):
    ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
    out.append([ci.low, ci.high])
json.dump(out, sys.stdout)
`
	cmd := exec.Command(py, "-c", script)
	cmd.Stdin = bytes.NewReader(in)
	b, err := cmd.Output()
	if err != nil {
		t.Fatalf("scipy: %v", err)
	}
	var want [][2]float64
	if err := json.Unmarshal(b, &want); err != nil {
		t.Fatal(err)
	}
	for i, c := range cases {
		got := Wilson(c[0], c[1])
		if math.Abs(float64(got.Low)-want[i][0]) > 1e-12 || math.Abs(float64(got.High)-want[i][1]) > 1e-12 {
			t.Errorf("Wilson(%d, %d) = [%v, %v], SciPy [%v, %v]", c[0], c[1], got.Low, got.High, want[i][0], want[i][1])
		}
	}
}
