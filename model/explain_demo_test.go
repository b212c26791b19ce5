package model_test

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

	"convtag/model"
	"convtag/model/nb"
	"convtag/model/token"
	"convtag/model/train"
)

// The tests in this file explain a network trained on the demo data, so they
// live outside package model: training (model/train) imports model.

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
	m    *model.Model
	base *nb.Model
	dev  []demoRecord
	err  error
}

// demoModel trains a network on the demo's training file (a second or
// two on one core) and the naive-Bayes baseline beside it.
func demoModel(t *testing.T) (*model.Model, *nb.Model, []demoRecord) {
	t.Helper()
	d := &demoOnce
	d.Do(func() {
		trainRecs := readDemo(t, "train.jsonl")
		d.dev = readDemo(t, "dev.jsonl")
		var labels []string
		for _, r := range trainRecs {
			if !slices.Contains(labels, r.Label) {
				labels = append(labels, r.Label)
			}
		}
		slices.Sort(labels)
		tok := token.New(token.Settings{})
		var ts token.Tokens
		counts := map[string]int{}
		for _, r := range trainRecs {
			train.CountTokens(counts, tok, &ts, []byte(r.Text))
		}
		m, err := model.New(model.Config{Dim: 32, Widths: []int{3, 4, 5}, Filters: 32, Buckets: 200}, token.Settings{}, labels, train.BuildWords(counts, 2, 0), 1)
		if err != nil {
			d.err = err
			return
		}
		ex := func(rs []demoRecord) []train.Example {
			var out []train.Example
			for _, r := range rs {
				out = append(out, train.Example{Rows: m.AppendRows(nil, &ts, []byte(r.Text)), Label: slices.Index(labels, r.Label)})
			}
			return out
		}
		if _, d.err = train.Train(m, ex(trainRecs), ex(d.dev), train.TrainOptions{Epochs: 20, Jobs: 1, Seed: 1}); d.err != nil {
			return
		}
		docs, ys := make([][]string, len(trainRecs)), make([]int, len(trainRecs))
		for i, r := range trainRecs {
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

func argmax32(x []float32) (int, float32) {
	b := 0
	for i, v := range x {
		if v > x[b] {
			b = i
		}
	}
	return b, x[b]
}
