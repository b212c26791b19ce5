package linear

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
)

// TestFitDeterministic fits the same corpus twice: the weights must be
// bit-identical (the solver's operations run in a fixed order).
func TestFitDeterministic(t *testing.T) {
	docs, y := ferryCorpus(200, 7)
	a, err := Fit(docs, y, len(ferryLabels), Options{C: 10})
	if err != nil {
		t.Fatal(err)
	}
	b, err := Fit(docs, y, len(ferryLabels), Options{C: 10})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a.Weights, b.Weights) || !slices.Equal(a.Bias, b.Bias) {
		t.Fatal("two fits of the same input differ")
	}
	if err := a.Verify(); err != nil {
		t.Fatal(err)
	}
}

// TestIdfWorkedExample checks the idf formula on a corpus small enough to
// count by hand: 3 texts; "b" is in 2, so ln(4/3)+1; "a", "a b" in 1, so
// ln(4/2)+1 (scikit-learn's smooth idf, see BuildVocabulary). The text
// "a b a" has counts a 2, "a b" 1, "b" 1, "b a" 1.
func TestIdfWorkedExample(t *testing.T) {
	docs := [][]string{strings.Fields("a b a"), strings.Fields("b c"), strings.Fields("c")}
	v, err := BuildVocabulary(docs, 0)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"a", "a b", "b", "b a", "b c", "c"}
	for i, g := range want {
		if v.Gram(i) != g || v.Find(g) != i {
			t.Fatalf("feature %d: %q (Find %d), want %q", i, v.Gram(i), v.Find(g), g)
		}
	}
	if v.Find("a c") != -1 || v.Find("zzz") != -1 {
		t.Error("Find of an unseen n-gram is not -1")
	}
	one, two := math.Log(4.0/2)+1, math.Log(4.0/3)+1
	raw := []float64{2 * one, one, two, one}
	norm := math.Sqrt(raw[0]*raw[0] + raw[1]*raw[1] + raw[2]*raw[2] + raw[3]*raw[3])
	got := v.TfIdf(nil, docs[0])
	if len(got) != 4 {
		t.Fatalf("%d entries, want 4", len(got))
	}
	for k, e := range got {
		if int(e.Feature) != k || math.Abs(e.Value-raw[k]/norm) > 1e-7 {
			t.Errorf("entry %d: feature %d value %.8f, want %d %.8f", k, e.Feature, e.Value, k, raw[k]/norm)
		}
	}
}

type byteTokens [][]byte

func (b byteTokens) Len() int        { return len(b) }
func (b byteTokens) At(i int) []byte { return b[i] }

// TestPredictorNoAllocs checks that scoring allocates nothing once warm,
// through both entry points, and that they agree.
func TestPredictorNoAllocs(t *testing.T) {
	docs, y := ferryCorpus(200, 7)
	m, err := Fit(docs, y, len(ferryLabels), Options{})
	if err != nil {
		t.Fatal(err)
	}
	p := m.NewPredictor()
	d := docs[3]
	bt := make(byteTokens, len(d))
	for i, s := range d {
		bt[i] = []byte(s)
	}
	a := slices.Clone(p.Probs(d))
	if b := p.ProbsOf(bt); !slices.Equal(a, b) {
		t.Fatalf("Probs %v, ProbsOf %v", a, b)
	}
	if n := testing.AllocsPerRun(100, func() { p.Probs(d) }); n != 0 {
		t.Errorf("Probs: %v allocations per text", n)
	}
	var tk Tokens = bt // boxed once, as a caller holding a *token.Tokens never has to
	if n := testing.AllocsPerRun(100, func() { p.ProbsOf(tk) }); n != 0 {
		t.Errorf("ProbsOf: %v allocations per text", n)
	}
}

// TestRejects feeds inconsistent arrays and inputs.
func TestRejects(t *testing.T) {
	docs, y := ferryCorpus(50, 7)
	m, err := Fit(docs, y, len(ferryLabels), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := New(m.Vocabulary, m.Weights[1:], m.Bias, 1); !errors.Is(err, ErrArrays) {
		t.Errorf("short weights: %v", err)
	}
	v := m.Vocabulary
	v.IDF = v.IDF[1:]
	if _, err := New(v, m.Weights, m.Bias, 1); !errors.Is(err, ErrArrays) {
		t.Errorf("short idf: %v", err)
	}
	for name, spoil := range map[string]func(v *Vocabulary){
		"order":  func(v *Vocabulary) { v.Grams = slices.Clone(v.Grams); v.Grams[0], v.Grams[len(v.Grams)-1] = 'z', 'a' },
		"index":  func(v *Vocabulary) { v.Index = slices.Clone(v.Index); slices.Reverse(v.Index) },
		"idf":    func(v *Vocabulary) { v.IDF = slices.Clone(v.IDF); v.IDF[2] = float32(math.NaN()) },
		"offset": func(v *Vocabulary) { v.Offsets = slices.Clone(v.Offsets); v.Offsets[1] = 0 },
	} {
		v := m.Vocabulary
		spoil(&v)
		if err := v.Verify(); !errors.Is(err, ErrArrays) {
			t.Errorf("%s: Verify says %v", name, err)
		}
	}
	for name, f := range map[string]func() error{
		"space in token": func() error { _, err := Fit([][]string{{"a b"}, {"c"}}, []int{0, 1}, 2, Options{}); return err },
		"label range":    func() error { _, err := Fit([][]string{{"a"}, {"c"}}, []int{0, 2}, 2, Options{}); return err },
		"lengths":        func() error { _, err := Fit([][]string{{"a"}}, []int{0, 1}, 2, Options{}); return err },
		"C":              func() error { _, err := Fit([][]string{{"a"}, {"c"}}, []int{0, 1}, 2, Options{C: -1}); return err },
	} {
		if err := f(); !errors.Is(err, ErrInput) {
			t.Errorf("%s: %v", name, err)
		}
	}
}
