package nb

import (
	"bytes"
	"math"
	"strings"
	"testing"
)

// TestManningExample reproduces the worked example of Manning, Raghavan and
// Schütze, "Introduction to Information Retrieval" (2008), section 13.2,
// table 13.1 and example 13.1: multinomial naive Bayes with add-one
// smoothing on unigrams. Bigrams are added here, so the check is on the
// unigram conditional probabilities the book lists (P(Chinese|c) = 3/7,
// P(Tokyo|c) = P(Japan|c) = 1/14) recomputed under our feature set, and on
// the book's decision (class c for document 5).
func TestManningExample(t *testing.T) {
	docs := [][]string{
		strings.Fields("Chinese Beijing Chinese"),
		strings.Fields("Chinese Chinese Shanghai"),
		strings.Fields("Chinese Macao"),
		strings.Fields("Tokyo Japan Chinese"),
	}
	y := []int{0, 0, 0, 1}
	m, err := Fit(docs, y, 2, 1)
	if err != nil {
		t.Fatal(err)
	}
	// Unigram vocabulary 6 words; bigrams: chinese-beijing, beijing-chinese,
	// chinese-chinese, chinese-shanghai, chinese-macao, tokyo-japan,
	// japan-chinese: |V| = 13. Class c has 8 unigrams + 5 bigrams = 13
	// occurrences, class j 3 + 2 = 5.
	if m.Features() != 13 {
		t.Fatalf("features = %d, want 13", m.Features())
	}
	want := map[string][2]float64{
		"chinese": {(5 + 1) / 26.0, (1 + 1) / 18.0},
		"tokyo":   {1 / 26.0, 2 / 18.0},
	}
	for f, p := range want {
		for c := range 2 {
			if got := math.Exp(m.logp[f][c]); math.Abs(got-p[c]) > 1e-12 {
				t.Errorf("P(%s|%d) = %g, want %g", f, c, got, p[c])
			}
		}
	}
	if got := m.Predict(strings.Fields("Chinese Chinese Chinese Tokyo Japan")); got != 0 {
		t.Errorf("document 5 predicted %d, the book says class c (0)", got)
	}
}

func TestEncodeRoundTrip(t *testing.T) {
	docs := [][]string{strings.Fields("a b c"), strings.Fields("b c d"), strings.Fields("x")}
	m, err := Fit(docs, []int{0, 1, 1}, 3, 0.5)
	if err != nil {
		t.Fatal(err)
	}
	enc := m.Encode()
	m2, err := Decode(enc)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(enc, m2.Encode()) {
		t.Fatal("re-encoding differs")
	}
	for _, d := range [][]string{strings.Fields("a b"), strings.Fields("c d x"), nil} {
		a, b := m.Scores(d), m2.Scores(d)
		for c := range a {
			if a[c] != b[c] && !(math.IsInf(a[c], -1) && math.IsInf(b[c], -1)) {
				t.Errorf("%v: score %d %g after decode, %g before", d, c, b[c], a[c])
			}
		}
	}
}

func TestDecodeRejects(t *testing.T) {
	for _, s := range []string{"", "nb1 0 1\n", "nb1 2 1\n1\n", "nb1 2 1\n1 1\nx\ta\n", "nb1 2 1\n1 1\n1\t2\ta\n1\t2\ta\n", "nb2 2 1\n1 1\n"} {
		if _, err := Decode([]byte(s)); err == nil {
			t.Errorf("%q: no error", s)
		}
	}
}

func FuzzDecode(f *testing.F) {
	f.Add([]byte("nb1 2 1\n3 4\n1\t2\tword\n0\t1\ta\x1fb\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := Decode(b)
		if err != nil {
			return
		}
		m2, err := Decode(m.Encode())
		if err != nil {
			t.Fatalf("re-decode: %v", err)
		}
		if !bytes.Equal(m.Encode(), m2.Encode()) {
			t.Fatal("encoding not stable")
		}
	})
}
