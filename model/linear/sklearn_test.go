package linear

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"testing"
)

// The outside reference here is scikit-learn (Debian's python3-sklearn,
// 1.2.1 when these tests were written), driven by testdata/sklearn_linear.py
// at the module root. It is called as /usr/bin/python3: another python3 may
// come first on PATH.

type skRequest struct {
	Docs        [][]string `json:"docs"`
	Y           []int      `json:"y"`
	Eval        [][]string `json:"eval"`
	MaxFeatures *int       `json:"max_features,omitempty"`
	C           *float64   `json:"C,omitempty"`
	Grid        []float64  `json:"grid,omitempty"`
	Dev         [][]string `json:"dev,omitempty"`
	DevY        []int      `json:"dev_y,omitempty"`
	Baselines   bool       `json:"baselines,omitempty"`
}

type skAnswer struct {
	Features    []string       `json:"features"`
	IDF         []float64      `json:"idf"`
	DocsTfIdf   [][][2]float64 `json:"docs_tfidf"`
	EvalTfIdf   [][][2]float64 `json:"eval_tfidf"`
	Probs       [][]float64    `json:"probs"`
	Classes     []int          `json:"classes"`
	DevAccuracy []float64      `json:"dev_accuracy"`
	Chosen      float64        `json:"chosen"`
	ChosenPred  []int          `json:"chosen_pred"`
	SVCPred     []int          `json:"svc_pred"`
	LRPred      []int          `json:"lr_pred"`
}

// requireSklearn skips the test when scikit-learn is missing, or fails it
// under CI=true, where .ci/run installs it.
func requireSklearn(t testing.TB) {
	t.Helper()
	out, err := exec.Command("/usr/bin/python3", "-c", "import sklearn, numpy").CombinedOutput()
	if err == nil {
		return
	}
	msg := "scikit-learn not available to /usr/bin/python3 (Debian: python3-sklearn): " + string(bytes.TrimSpace(out))
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

func runSklearn(t testing.TB, req skRequest) skAnswer {
	t.Helper()
	requireSklearn(t)
	_, file, _, _ := runtime.Caller(0)
	script := filepath.Join(filepath.Dir(file), "..", "..", "testdata", "sklearn_linear.py")
	in, err := json.Marshal(req)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("/usr/bin/python3", script)
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("sklearn_linear.py: %v: %s", err, stderr.Bytes())
	}
	var a skAnswer
	if err := json.Unmarshal(out, &a); err != nil {
		t.Fatalf("sklearn_linear.py: %v", err)
	}
	return a
}

// compareTfIdf checks our vectors of docs against scikit-learn's rows:
// the same non-zero features, each value within 1e-6. The idf is stored as
// float32 (relative rounding 6e-8), which bounds how close the entries can
// be; 1e-6 absolute on entries of at most 1 leaves a margin above that.
func compareTfIdf(t *testing.T, v *Vocabulary, docs [][]string, want [][][2]float64) {
	t.Helper()
	if len(want) != len(docs) {
		t.Fatalf("%d reference rows for %d texts", len(want), len(docs))
	}
	var ents []Entry
	worst := 0.0
	for i, d := range docs {
		ents = v.TfIdf(ents, d)
		if len(ents) != len(want[i]) {
			t.Fatalf("text %d %q: %d non-zero features, scikit-learn %d", i, d, len(ents), len(want[i]))
		}
		for k, e := range ents {
			if int(e.Feature) != int(want[i][k][0]) {
				t.Fatalf("text %d: entry %d is feature %d, scikit-learn %v", i, k, e.Feature, want[i][k][0])
			}
			diff := math.Abs(e.Value - want[i][k][1])
			worst = max(worst, diff)
			if diff > 1e-6 {
				t.Errorf("text %d feature %q: %.9f, scikit-learn %.9f", i, v.Gram(int(e.Feature)), e.Value, want[i][k][1])
			}
		}
	}
	t.Logf("%d texts: largest tf-idf difference %.2g", len(docs), worst)
}

// TestTfIdfMatchesSklearn compares the vocabulary (same n-grams in the
// same order), the idf and the tf-idf matrix of an invented corpus, and
// of texts with unseen words, with scikit-learn's
// TfidfVectorizer(ngram_range=(1, 2)) over the same tokens, with and
// without max_features (at a cut where no two n-grams tie, since
// scikit-learn leaves tie order unspecified).
func TestTfIdfMatchesSklearn(t *testing.T) {
	docs, _ := ferryCorpus(300, 1)
	eval, _ := ferryCorpus(60, 2)
	eval = append(eval, []string{"unheard", "of"}, []string{}, []string{"ferry"}, []string{"the", "the", "the", "ferry"})
	for _, maxf := range []int{0, cutWithoutTie(docs, 150)} {
		t.Run(fmt.Sprintf("max_features=%d", maxf), func(t *testing.T) {
			req := skRequest{Docs: docs, Y: make([]int, len(docs)), Eval: eval}
			if maxf > 0 {
				req.MaxFeatures = &maxf
			}
			ref := runSklearn(t, req)
			v, err := BuildVocabulary(docs, maxf)
			if err != nil {
				t.Fatal(err)
			}
			if err := v.Verify(); err != nil {
				t.Fatal(err)
			}
			if v.Len() != len(ref.Features) {
				t.Fatalf("max %d: %d features, scikit-learn %d", maxf, v.Len(), len(ref.Features))
			}
			for i, f := range ref.Features {
				if v.Gram(i) != f {
					t.Fatalf("feature %d: %q, scikit-learn %q", i, v.Gram(i), f)
				}
				if d := math.Abs(float64(v.IDF[i]) - ref.IDF[i]); d > 1e-6*ref.IDF[i] {
					t.Errorf("idf(%q) = %.9g, scikit-learn %.9g", f, v.IDF[i], ref.IDF[i])
				}
			}
			compareTfIdf(t, v, docs, ref.DocsTfIdf)
			compareTfIdf(t, v, eval, ref.EvalTfIdf)
		})
	}
}

// cutWithoutTie returns the smallest feature count at least n at which the
// n-grams kept by total count are unambiguous.
func cutWithoutTie(docs [][]string, n int) int {
	tf := map[string]int{}
	for _, d := range docs {
		for i, w := range d {
			tf[w]++
			if i > 0 {
				tf[d[i-1]+" "+w]++
			}
		}
	}
	counts := make([]int, 0, len(tf))
	for _, c := range tf {
		counts = append(counts, c)
	}
	// Sorted descending; a cut k is clean when counts[k-1] > counts[k].
	for i := range counts {
		for j := i + 1; j < len(counts); j++ {
			if counts[j] > counts[i] {
				counts[i], counts[j] = counts[j], counts[i]
			}
		}
	}
	for k := n; k < len(counts); k++ {
		if counts[k-1] > counts[k] {
			return k
		}
	}
	return len(counts)
}

// TestFitMatchesSklearn fits the invented four-queue corpus at fixed C and
// compares the probabilities on held-out texts with scikit-learn's
// LogisticRegression(C, solver='lbfgs', tol=1e-8, max_iter=10000,
// multi_class='multinomial') on the same features. Both minimise the same
// strictly convex objective to a gradient of 1e-8, so the minimisers
// agree closely; the 1e-3 tolerance on probabilities covers the two
// solvers' stopping points and our weights' float32 storage (relative
// 6e-8). The test also checks that the fit moved the probabilities far
// from uniform, so agreement is not trivial.
func TestFitMatchesSklearn(t *testing.T) {
	docs, y := ferryCorpus(300, 1)
	eval, _ := ferryCorpus(80, 3)
	for _, c := range []float64{0.3, 3, 100} {
		ref := runSklearn(t, skRequest{Docs: docs, Y: y, Eval: eval, C: &c})
		m, err := Fit(docs, y, len(ferryLabels), Options{C: c})
		if err != nil {
			t.Fatal(err)
		}
		p := m.NewPredictor()
		worst, spread := 0.0, 0.0
		for i, d := range eval {
			got := p.Probs(d)
			for k := range got {
				diff := math.Abs(got[k] - ref.Probs[i][k])
				worst = max(worst, diff)
				spread = max(spread, math.Abs(ref.Probs[i][k]-1/float64(len(got))))
				if diff > 1e-3 {
					t.Errorf("C %g text %d label %d: p %.6f, scikit-learn %.6f", c, i, k, got[k], ref.Probs[i][k])
				}
			}
		}
		if spread < 0.2 {
			t.Errorf("C %g: probabilities within %.3f of uniform: the comparison would prove little", c, spread)
		}
		t.Logf("C %g: largest probability difference %.2g (largest distance from uniform %.2f)", c, worst, spread)
	}
}

// TestChooseMatchesSklearn runs the choice of C over DefaultGrid on a
// train/dev split of the invented corpus in both implementations: the dev
// accuracy of every C and the chosen C must be equal. Then the held-out
// accuracy of the chosen model must be within half a point: the
// probabilities agree to 1e-3 (TestFitMatchesSklearn), so only a text
// whose top two labels lie that close can flip, one text in 200 here.
func TestChooseMatchesSklearn(t *testing.T) {
	train, ty := ferryCorpus(300, 1)
	dev, dy := ferryCorpus(100, 4)
	test, sy := ferryCorpus(200, 5)
	ref := runSklearn(t, skRequest{Docs: train, Y: ty, Eval: test, Grid: DefaultGrid, Dev: dev, DevY: dy})
	m, ch, err := Choose(train, ty, dev, dy, len(ferryLabels), nil, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for k, c := range DefaultGrid {
		if ch.DevAccuracy[k] != ref.DevAccuracy[k] {
			t.Errorf("C %g: dev accuracy %.4f, scikit-learn %.4f", c, ch.DevAccuracy[k], ref.DevAccuracy[k])
		}
	}
	if ch.C != ref.Chosen {
		t.Errorf("chose C %g, scikit-learn %g", ch.C, ref.Chosen)
	}
	p := m.NewPredictor()
	var ours, theirs int
	for i, d := range test {
		if p.Predict(d) == sy[i] {
			ours++
		}
		if ref.ChosenPred[i] == sy[i] {
			theirs++
		}
	}
	a, b := float64(ours)/float64(len(test)), float64(theirs)/float64(len(test))
	if math.Abs(a-b) > 0.005 {
		t.Errorf("held-out accuracy %.4f, scikit-learn %.4f", a, b)
	}
	t.Logf("dev accuracy by C %v: %v; chosen %g; held-out %.4f (scikit-learn %.4f)", DefaultGrid, ch.DevAccuracy, ch.C, a, b)
}
