package main

import (
	"encoding/json"
	"math"
	"testing"

	"convtag/model"
)

func TestWhyScorer(t *testing.T) {
	fixture(t)
	m, err := model.Open(evalModel)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	sc := whyTagger{m: m, n: 3}.NewScorer().(*whyScorer)
	ref := m.NewPredictor()
	for _, text := range []string{
		`Claim your FREE island cruise now, click "here" \ winners-only.example`,
		"lost a blue umbrella on the morning boat",
		"ok",
		"",
	} {
		probs := append([]float32(nil), sc.Score([]byte(text))...)
		want := ref.Predict([]byte(text))
		for i := range probs {
			if probs[i] != want[i] {
				t.Fatalf("%q: Score %v, Predict %v", text, probs, want)
			}
		}
		var got []struct {
			NGram    string  `json:"ngram"`
			Position int     `json:"position"`
			Width    int     `json:"width"`
			Share    float64 `json:"share"`
		}
		b := sc.AppendWhy([]byte("x"))
		if err := json.Unmarshal(b[1:], &got); err != nil {
			t.Fatalf("%q: %s: %v", text, b, err)
		}
		_, ex := ref.Explain([]byte(text), -1, 3)
		if len(got) != len(ex.Windows) || len(got) > 3 {
			t.Fatalf("%q: %d windows, Explain %d", text, len(got), len(ex.Windows))
		}
		for i, g := range got {
			e := ex.Windows[i]
			if g.NGram != e.Text || g.Position != e.Start || g.Width != e.Width || math.Abs(g.Share-float64(e.Share)) > 0.0005 {
				t.Errorf("%q: window %d = %+v, Explain %+v", text, i, g, e)
			}
		}
	}
}
