package model

import (
	"bytes"
	"errors"
	"math"
	"testing"

	"convtag/model/linear"
	"convtag/model/safetensors"
	"convtag/model/token"
)

// scorerModel is a small model with a linear baseline fitted on the tokens
// its own tokenizer gives.
func scorerModel(t *testing.T) *Model {
	t.Helper()
	m := stModel(t, 10, 0, "F32")
	texts := []string{"w1 w2 w3", "w2 w3 w4 w5", "w6 w7", "w7 w8 w9 w1", "w0 w0 w3", "w5 w9"}
	ys := []int{0, 0, 1, 1, 2, 2}
	var ts token.Tokens
	docs := make([][]string, len(texts))
	for i, x := range texts {
		m.Tokenizer().Tokenize(&ts, []byte(x))
		for j := range ts.Len() {
			docs[i] = append(docs[i], string(ts.At(j)))
		}
	}
	lm, err := linear.Fit(docs, ys, len(m.Labels), linear.Options{C: 3})
	if err != nil {
		t.Fatal(err)
	}
	m.Linear = lm
	return m
}

// TestScorerRoundTrip saves a model with a linear baseline and each
// scorer, opens it, and checks that Predict gives what the network and the
// linear package give on their own, mixed by the documented formula
// (computed here independently, in float64 from the softmax outputs).
func TestScorerRoundTrip(t *testing.T) {
	texts := []string{"w1 w2 w3 w9", "w7", "", "unknown words only", "w0 w5 w6 w7 w8"}
	for _, sc := range []Scorer{{}, {Kind: ScoreBaseline}, {Kind: ScoreCombined, Weight: 0.3}, {Kind: ScoreCombined, Weight: 0.9}} {
		t.Run(sc.String(), func(t *testing.T) {
			m := scorerModel(t)
			m.Scorer = sc
			var buf bytes.Buffer
			if err := m.Encode(&buf, SaveOptions{}); err != nil {
				t.Fatal(err)
			}
			got, err := Load(buf.Bytes(), "scorer.safetensors")
			if err != nil {
				t.Fatal(err)
			}
			if err := got.Verify(); err != nil {
				t.Fatal(err)
			}
			if got.Scorer != sc || got.Linear == nil || got.Linear.C != 3 {
				t.Fatalf("opened scorer %+v, linear %v; saved %+v", got.Scorer, got.Linear != nil, sc)
			}
			p := got.NewPredictor()
			net := m.NewPredictor()
			net.SetScorer(Scorer{})
			lp := m.Linear.NewPredictor()
			var ts token.Tokens
			for _, x := range texts {
				probs := append([]float32(nil), p.Predict([]byte(x))...)
				pn := net.Predict([]byte(x))
				m.Tokenizer().Tokenize(&ts, []byte(x))
				var toks []string
				for j := range ts.Len() {
					toks = append(toks, string(ts.At(j)))
				}
				pb := lp.Probs(toks)
				w := sc.weight()
				var z [3]float64
				var sum float64
				for c := range z {
					z[c] = math.Exp((1-w)*math.Log(float64(pn[c])) + w*math.Log(pb[c]))
					sum += z[c]
				}
				for c := range z {
					if d := math.Abs(float64(probs[c]) - z[c]/sum); d > 1e-6 {
						t.Errorf("%q label %d: %v, want %v (network %v, baseline %v)", x, c, probs[c], z[c]/sum, pn[c], pb[c])
					}
				}
			}
		})
	}
}

// TestScorerRefused: a scorer the file cannot run, and a damaged baseline,
// are errors at open or Verify, never a silent fall-back.
func TestScorerRefused(t *testing.T) {
	m := scorerModel(t)
	if _, err := ParseScorer(m, "neural"); err == nil {
		t.Error("unknown scorer kind accepted")
	}
	m.Linear = nil
	if _, err := ParseScorer(m, ScoreBaseline); err == nil {
		t.Error("baseline scorer accepted without a linear baseline")
	}
	m = scorerModel(t)
	m.Linear.Weights[2] = float32(math.NaN())
	m.Scorer = Scorer{Kind: ScoreCombined, Weight: 0.5}
	var buf bytes.Buffer
	if err := m.Encode(&buf, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	got, err := Load(buf.Bytes(), "nan.safetensors")
	if err != nil {
		t.Fatal(err)
	}
	if err := got.Verify(); !errors.Is(err, ErrBaseline) {
		t.Errorf("Verify of a NaN baseline weight: %v, want ErrBaseline", err)
	}
	for _, bad := range []string{`{"kind":"combined","baseline_weight":1.5}`, `{"kind":"combined"}`, `{"kind":"forest"}`, `not json`} {
		meta, ts, err := safetensors.Parse(buf.Bytes())
		if err != nil {
			t.Fatal(err)
		}
		meta[MetaScorer] = bad
		var b bytes.Buffer
		if err := safetensors.Encode(&b, meta, ts); err != nil {
			t.Fatal(err)
		}
		if _, err := Load(b.Bytes(), "bad"); !errors.Is(err, ErrMetadata) {
			t.Errorf("scorer %s: Load gave %v, want ErrMetadata", bad, err)
		}
	}
}
