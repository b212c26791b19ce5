package model

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"convtag/model/token"
)

// TestExplainExact checks that the windows' scores and the bias add up to
// the logit (the decomposition is exact, with and without a hidden layer),
// that the shares' magnitudes add up to 1, that every positive feature is
// credited to one window, and that the folded path explains as the direct
// one does.
func TestExplainExact(t *testing.T) {
	words := strings.Fields("the ferry to skerrow leaves at noon from pier two ticket refund lost bag blue umbrella thanks crew")
	for _, hidden := range []int{0, 7} {
		cfg := Config{Dim: 8, Widths: []int{2, 3, 4}, Filters: 6, Hidden: hidden, Buckets: 11}
		m, err := New(cfg, token.Settings{}, []string{"a", "b", "c"}, words, 3)
		if err != nil {
			t.Fatal(err)
		}
		// Random biases, so some features are switched off and some hidden
		// units too.
		rng := rand.New(rand.NewPCG(9, uint64(hidden)))
		for i := range m.Convs {
			for f := range m.Convs[i].B {
				m.Convs[i].B[f] = float32(rng.NormFloat64() * 0.05)
			}
		}
		if m.Hidden != nil {
			for k := range m.Hidden.B {
				m.Hidden.B[k] = float32(rng.NormFloat64() * 0.1)
			}
		}
		direct := m.NewPredictor()
		folded := *m
		FoldModel(&folded, false)
		fp := folded.NewPredictor()
		for r := range 200 {
			n := rng.IntN(12)
			var tw []string
			for range n {
				tw = append(tw, words[rng.IntN(len(words))])
			}
			if r%5 == 0 {
				tw = append(tw, "unknownword")
			}
			text := []byte(strings.Join(tw, " "))
			var ts token.Tokens
			n = len(tokenStrings(m.Tokenizer(), &ts, string(text)))
			probs, ex := direct.Explain(text, -1, 0)
			if best, _ := argmax32(probs); ex.Label != best {
				t.Fatalf("explained label %d, most probable %d", ex.Label, best)
			}
			for c := range 3 {
				_, ex := direct.Explain(text, c, 0)
				sum := float64(ex.Bias)
				var abs float64
				credited := 0
				for _, e := range ex.Windows {
					sum += float64(e.Score)
					abs += math.Abs(float64(e.Share))
					credited += e.Filters
					if e.Start < 0 || e.Start >= max(n, 1) || (n > 0 && e.Text == "") {
						t.Fatalf("window %+v in a text of %d tokens", e, n)
					}
				}
				if d := math.Abs(sum - float64(ex.Logit)); d > 1e-4*(1+math.Abs(float64(ex.Logit))) {
					t.Fatalf("hidden %d, %q label %d: windows+bias %v, logit %v", hidden, text, c, sum, ex.Logit)
				}
				if len(ex.Windows) > 0 && math.Abs(abs-1) > 1e-5 {
					t.Fatalf("shares' magnitudes add to %v", abs)
				}
				positive := 0
				for _, v := range direct.Features() {
					if v > 0 {
						positive++
					}
				}
				if credited != positive {
					t.Fatalf("%d filters credited, %d features positive", credited, positive)
				}
				if !slices.IsSortedFunc(ex.Windows, func(a, b Evidence) int { return -cmpF(a.Score, b.Score) }) {
					t.Fatal("windows not sorted by score")
				}
				_, fx := fp.Explain(text, c, 0)
				if len(fx.Windows) != len(ex.Windows) {
					t.Fatalf("folded: %d windows, direct %d", len(fx.Windows), len(ex.Windows))
				}
				for i := range fx.Windows {
					a, b := fx.Windows[i], ex.Windows[i]
					if a.Text != b.Text || a.Start != b.Start || math.Abs(float64(a.Score-b.Score)) > 1e-4 {
						t.Fatalf("folded window %+v, direct %+v", a, b)
					}
				}
			}
			if _, top := direct.Explain(text, 1, 2); len(top.Windows) > 2 {
				t.Fatalf("asked for 2 windows, got %d", len(top.Windows))
			}
		}
	}
}

func cmpF(a, b float32) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func argmax32(x []float32) (int, float32) {
	b := 0
	for i, v := range x {
		if v > x[b] {
			b = i
		}
	}
	return b, x[b]
}

func tokenStrings(tok *token.Tokenizer, ts *token.Tokens, s string) []string {
	tok.Tokenize(ts, []byte(s))
	var out []string
	for i := range ts.Len() {
		out = append(out, string(ts.At(i)))
	}
	return out
}
