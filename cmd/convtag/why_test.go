package main

import (
	"encoding/json"
	"math"
	"strings"
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

// tag --why N splices the evidence into every JSON record and into text
// lines emitted as JSON; each window's n-gram is made of the record's own
// (normalised) words, and the output otherwise matches a run without --why.
func TestTagWhy(t *testing.T) {
	in := "{\"text\": \"the crossing was lovely and the staff were kind\"}\n" +
		"{\"id\": 7, \"text\": \"worst ferry ever, rude crew and cold food\"}\n"
	code, out, errs := runCmd(t, in, "tag", "--why", "2", "-j", "1")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	_, plain, _ := runCmd(t, in, "tag", "-j", "1")
	outLines, plainLines := strings.Split(strings.TrimSuffix(out, "\n"), "\n"), strings.Split(strings.TrimSuffix(plain, "\n"), "\n")
	inLines := strings.Split(strings.TrimSuffix(in, "\n"), "\n")
	if len(outLines) != len(inLines) || len(plainLines) != len(inLines) {
		t.Fatalf("got %d and %d lines for %d records", len(outLines), len(plainLines), len(inLines))
	}
	for i, line := range outLines {
		var rec struct {
			Text string `json:"text"`
			Why  []struct {
				Ngram    string  `json:"ngram"`
				Position int     `json:"position"`
				Width    int     `json:"width"`
				Share    float64 `json:"share"`
			} `json:"why"`
		}
		if err := json.Unmarshal([]byte(line), &rec); err != nil {
			t.Fatalf("line %d: %v: %s", i+1, err, line)
		}
		if len(rec.Why) == 0 || len(rec.Why) > 2 {
			t.Fatalf("line %d: %d windows, want 1..2: %s", i+1, len(rec.Why), line)
		}
		for _, w := range rec.Why {
			for _, word := range strings.Fields(w.Ngram) {
				if !strings.Contains(strings.ToLower(rec.Text), word) {
					t.Errorf("line %d: window %q has %q, not in the text", i+1, w.Ngram, word)
				}
			}
		}
		// Without the why member the record is the plain run's.
		cut := strings.Index(line, `,"why":`)
		if cut < 0 || line[:cut]+"}" != plainLines[i] {
			t.Errorf("line %d: %s\nplain: %s", i+1, line, plainLines[i])
		}
	}
}
