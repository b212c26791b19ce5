package model

import (
	"bufio"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"strings"
	"sync"
	"testing"

	"convtag/model/nb"
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

type demoRecord struct{ Text, Label string }

func readDemo(t *testing.T, name string) []demoRecord {
	t.Helper()
	f, err := os.Open("../testdata/demo/" + name)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []demoRecord
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r demoRecord
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		out = append(out, r)
	}
	return out
}

var demoOnce struct {
	sync.Once
	m    *Model
	base *nb.Model
	dev  []demoRecord
	err  error
}

// demoModel trains a network on the demo's training file (a second or
// two on one core) and the naive-Bayes baseline beside it.
func demoModel(t *testing.T) (*Model, *nb.Model, []demoRecord) {
	t.Helper()
	d := &demoOnce
	d.Do(func() {
		train := readDemo(t, "train.jsonl")
		d.dev = readDemo(t, "dev.jsonl")
		var labels []string
		for _, r := range train {
			if !slices.Contains(labels, r.Label) {
				labels = append(labels, r.Label)
			}
		}
		slices.Sort(labels)
		tok := token.New(token.Settings{})
		var ts token.Tokens
		counts := map[string]int{}
		for _, r := range train {
			CountTokens(counts, tok, &ts, []byte(r.Text))
		}
		m, err := New(Config{Dim: 32, Widths: []int{3, 4, 5}, Filters: 32, Buckets: 200}, token.Settings{}, labels, BuildWords(counts, 2, 0), 1)
		if err != nil {
			d.err = err
			return
		}
		ex := func(rs []demoRecord) []Example {
			var out []Example
			for _, r := range rs {
				out = append(out, Example{Rows: m.AppendRows(nil, &ts, []byte(r.Text)), Label: slices.Index(labels, r.Label)})
			}
			return out
		}
		if _, d.err = Train(m, ex(train), ex(d.dev), TrainOptions{Epochs: 20, Jobs: 1, Seed: 1}); d.err != nil {
			return
		}
		docs, ys := make([][]string, len(train)), make([]int, len(train))
		for i, r := range train {
			docs[i], ys[i] = tokenStrings(tok, &ts, r.Text), slices.Index(labels, r.Label)
		}
		d.base, d.err = nb.Fit(docs, ys, len(labels), 1)
		d.m = m
	})
	if d.err != nil {
		t.Fatal(d.err)
	}
	return d.m, d.base, d.dev
}

func tokenStrings(tok *token.Tokenizer, ts *token.Tokens, s string) []string {
	tok.Tokenize(ts, []byte(s))
	var out []string
	for i := range ts.Len() {
		out = append(out, string(ts.At(i)))
	}
	return out
}

// TestExplainSpam: for the demo's spam lines that the network tags spam,
// the top window must itself read as spam to an independent judge, the
// naive-Bayes baseline trained on the same records (it classifies the
// window's words alone as spam). Random windows of the same lines are the
// control: they must read as spam less often.
func TestExplainSpam(t *testing.T) {
	m, base, dev := demoModel(t)
	spam := slices.Index(m.Labels, "spam")
	p := m.NewPredictor()
	tok := m.Tokenizer()
	var ts token.Tokens
	rng := rand.New(rand.NewPCG(2, 2))
	tagged, judged, control := 0, 0, 0
	for _, r := range dev {
		if r.Label != "spam" {
			continue
		}
		probs, ex := p.Explain([]byte(r.Text), -1, 1)
		if best, _ := argmax32(probs); best != spam || len(ex.Windows) == 0 {
			continue
		}
		tagged++
		top := ex.Windows[0]
		if base.Predict(strings.Fields(top.Text)) == spam {
			judged++
		} else {
			t.Logf("top window %q of spam line %q does not read as spam to the baseline", top.Text, r.Text)
		}
		toks := tokenStrings(tok, &ts, r.Text)
		s := rng.IntN(max(len(toks), 1))
		if base.Predict(toks[s:min(s+top.Width, len(toks))]) == spam {
			control++
		}
	}
	t.Logf("spam lines tagged spam: %d; top window reads as spam: %d; a random window of the same width: %d", tagged, judged, control)
	if tagged < 10 {
		t.Fatalf("only %d spam lines tagged spam: the demo model is too weak to test", tagged)
	}
	// At least 3 in 4, and clearly more than random windows.
	if 4*judged < 3*tagged || judged <= control {
		t.Errorf("top window reads as spam in %d of %d lines (random window: %d)", judged, tagged, control)
	}
}

// TestExplainRemoval: taking the top window's words out of a record lowers
// the probability of the label it was tagged with, on many records, and by
// more than taking out a random window of the same width does.
func TestExplainRemoval(t *testing.T) {
	m, _, dev := demoModel(t)
	p := m.NewPredictor()
	var ts token.Tokens
	rng := rand.New(rand.NewPCG(4, 4))
	n, lowered := 0, 0
	var dropTop, dropRand float64
	for _, r := range dev {
		probs, ex := p.Explain([]byte(r.Text), -1, 1)
		if len(ex.Windows) == 0 {
			continue
		}
		c := ex.Label
		before := float64(probs[c])
		rows := m.AppendRows(nil, &ts, []byte(r.Text))
		top := ex.Windows[0]
		if len(rows) <= top.Width {
			continue // nothing would be left
		}
		end := min(top.Start+top.Width, len(rows))
		cut := slices.Concat(rows[:top.Start], rows[end:])
		after := float64(p.PredictRows(cut)[c])
		s := rng.IntN(len(rows))
		e := min(s+top.Width, len(rows))
		random := float64(p.PredictRows(slices.Concat(rows[:s], rows[e:]))[c])
		n++
		if after < before {
			lowered++
		}
		dropTop += before - after
		dropRand += before - random
	}
	t.Logf("records %d; top window's removal lowers the tag's probability in %d; mean drop %.3f (random window %.3f)",
		n, lowered, dropTop/float64(n), dropRand/float64(n))
	if n < 80 {
		t.Fatalf("only %d records long enough", n)
	}
	if 10*lowered < 9*n || dropTop <= dropRand {
		t.Errorf("removal lowered the probability in %d of %d records; mean drop %.3f vs random %.3f", lowered, n, dropTop/float64(n), dropRand/float64(n))
	}
}

func TestSurvey(t *testing.T) {
	m, _, dev := demoModel(t)
	s := m.NewSurvey(3)
	for _, r := range dev {
		s.Add([]byte(r.Text))
	}
	if s.Texts() != len(dev) {
		t.Fatalf("%d texts", s.Texts())
	}
	per := s.Labels(5)
	spam := slices.Index(m.Labels, "spam")
	if len(per) != len(m.Labels) || len(per[spam]) != 5 {
		t.Fatalf("labels: %v", per)
	}
	for c, list := range per {
		for i := 1; i < len(list); i++ {
			if list[i].Mean > list[i-1].Mean {
				t.Errorf("label %d not sorted: %v", c, list)
			}
		}
		t.Logf("%s: %v", m.Labels[c], list)
	}
	// The survey's mean for an n-gram is the mean of Explain's scores.
	g := per[spam][0]
	p := m.NewPredictor()
	var sum float64
	cnt := 0
	for _, r := range dev {
		_, ex := p.Explain([]byte(r.Text), spam, 0)
		for _, e := range ex.Windows {
			if e.Text == g.Text {
				sum += float64(e.Score)
				cnt++
			}
		}
	}
	if cnt != g.Count || math.Abs(sum/float64(cnt)-float64(g.Mean)) > 1e-4 {
		t.Errorf("%q: survey mean %v over %d, recomputed %v over %d", g.Text, g.Mean, g.Count, sum/float64(cnt), cnt)
	}
	fs := s.Filters()
	if len(fs) != m.Config.Features() {
		t.Fatalf("%d filters", len(fs))
	}
	on := 0
	for _, f := range fs {
		if len(f.Windows) > 3 {
			t.Errorf("filter %d: %d windows", f.Feature, len(f.Windows))
		}
		if len(f.Windows) > 0 {
			on++
		}
		for i := 1; i < len(f.Windows); i++ {
			if f.Windows[i].Activation > f.Windows[i-1].Activation || f.Windows[i].Text == f.Windows[i-1].Text {
				t.Errorf("filter %d windows %v", f.Feature, f.Windows)
			}
		}
	}
	if on == 0 {
		t.Error("no filter switched on by the sample")
	}
}
