package model

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"

	"convtag/internal/uci"
	"convtag/model/nb"
)

// The UCI cross-validation recipe, shared with testdata/torch_train.py.
// Architecture and training settings are Kim (2014)'s (widths 3,4,5 x 100
// filters, dropout 0.5, max-norm 3, batch 50, Adadelta rho 0.95 eps 1e-6)
// with random 128-dimensional vectors; 10% of each training portion is held
// out for early stopping (patience 5, at most 25 epochs). Vocabulary: words
// seen at least twice in the fold's training portion; the rest share 1,000
// hash buckets.
var uciRecipe = struct {
	Folds, Dim, Filters, Buckets, MinCount, Epochs, Patience, Batch int
	Widths                                                          []int
	Dropout, MaxNorm, DevFraction                                   float64
	Opt                                                             string
	Seed                                                            uint64
}{10, 128, 100, 1000, 2, 25, 5, 50, []int{3, 4, 5}, 0.5, 3, 0.1, OptAdadelta, 1}

// uciEnabled says whether the cross-validation runs: under CI=true (where
// .ci/run installs torch and npm) or with CONVTAG_UCI=1, and never under
// -short. It takes several minutes (see the report in the test's log).
func uciEnabled(t *testing.T) {
	if testing.Short() {
		t.Skip("-short")
	}
	if os.Getenv("CI") != "true" && os.Getenv("CONVTAG_UCI") != "1" {
		t.Skip("set CONVTAG_UCI=1 (CI=true does) to run the UCI cross-validation")
	}
}

func uciSentences(t *testing.T) []uci.Sentence {
	t.Helper()
	dir, err := uci.CacheDir()
	if err != nil {
		t.Fatal(err)
	}
	s, err := uci.Fetch(dir)
	if errors.Is(err, uci.ErrNoNpm) && os.Getenv("CI") != "true" {
		t.Skip(err)
	}
	if err != nil {
		t.Fatal(err)
	}
	return s
}

type uciFold struct {
	Train, Dev, Test []Example
	Rows             int
	nbAcc            float64
}

// TestUCICrossValidation runs stratified k-fold cross-validation on the
// UCI Sentiment Labelled Sentences (Kotzias et al. 2015; fetched from npm
// sentiment@5.0.2) joined and per source, for the network and the
// naive-Bayes baseline, and trains the same network with the same recipe,
// tokens, vocabulary and folds in PyTorch (testdata/torch_train.py). The
// network's mean accuracy on the joined set must be within 2 points of
// PyTorch's; the baseline's mean near 0.83 (measured 0.834 +- 0.018 for
// uni+bigram naive Bayes, 10-fold, in the issue; we accept 0.80..0.86).
func TestUCICrossValidation(t *testing.T) {
	uciEnabled(t)
	requireTorch(t)
	all := uciSentences(t)
	r := uciRecipe
	if v := os.Getenv("CONVTAG_UCI_FOLDS"); v != "" {
		r.Folds, _ = strconv.Atoi(v)
	}
	sets := []struct {
		name    string
		sources []string
	}{{"joined", uci.Sources}}
	// CONVTAG_UCI_SOURCES=1 adds each source on its own (network against
	// baseline, for the note); =only runs just those.
	if os.Getenv("CONVTAG_UCI_SOURCES") == "only" {
		sets = sets[:0]
	}
	if v := os.Getenv("CONVTAG_UCI_SOURCES"); v == "1" || v == "only" {
		for _, s := range uci.Sources {
			sets = append(sets, struct {
				name    string
				sources []string
			}{s, []string{s}})
		}
	}
	for _, set := range sets {
		var texts []string
		var labels []int
		for _, s := range all {
			for _, src := range set.sources {
				if s.Source == src {
					texts = append(texts, s.Text)
					l := 0
					if s.Label == "positive" {
						l = 1
					}
					labels = append(labels, l)
				}
			}
		}
		folds := uciFolds(t, texts, labels)
		var ours, base []float64
		start := time.Now()
		for k, f := range folds {
			acc := uciTrainGo(t, f, k)
			ours = append(ours, acc)
			base = append(base, f.nbAcc)
			t.Logf("%s fold %d: network %.4f  naive Bayes %.4f", set.name, k+1, acc, f.nbAcc)
		}
		goTime := time.Since(start)
		mo, so := meanStd(ours)
		mb, sb := meanStd(base)
		if set.name != "joined" {
			// Per source: figures for the note, network against baseline.
			t.Logf("%s %d-fold: network %.4f +- %.4f (%.0fs), naive Bayes %.4f +- %.4f", set.name, r.Folds, mo, so, goTime.Seconds(), mb, sb)
			continue
		}
		ref, torchTime := uciTrainTorch(t, folds)
		for k, a := range ref {
			t.Logf("%s fold %d: pytorch %.4f", set.name, k+1, a)
		}
		mr, sr := meanStd(ref)
		t.Logf("%s %d-fold: network %.4f +- %.4f (%.0fs), pytorch %.4f +- %.4f (%.0fs), naive Bayes %.4f +- %.4f",
			set.name, r.Folds, mo, so, goTime.Seconds(), mr, sr, torchTime, mb, sb)
		if math.Abs(mo-mr) > 0.02 {
			t.Errorf("network mean %.4f is not within 2 points of PyTorch's %.4f", mo, mr)
		}
		if mb < 0.80 || mb > 0.86 {
			t.Errorf("naive-Bayes mean %.4f is not near 0.83", mb)
		}
	}
}

// uciFolds builds each fold's examples: a vocabulary from the fold's
// training portion, the training portion split into train and dev, and the
// test fold; and scores the naive-Bayes baseline trained on the whole
// training portion.
func uciFolds(t *testing.T, texts []string, labels []int) []uciFold {
	r := uciRecipe
	if v := os.Getenv("CONVTAG_UCI_FOLDS"); v != "" {
		r.Folds, _ = strconv.Atoi(v)
	}
	tok := NewTokenizer(TokenizerSettings{})
	var ts Tokens
	tokens := make([][]string, len(texts))
	for i, s := range texts {
		tok.Tokenize(&ts, []byte(s))
		for j := range ts.Len() {
			tokens[i] = append(tokens[i], string(ts.At(j)))
		}
	}
	fold := StratifiedFolds(labels, r.Folds, r.Seed)
	var out []uciFold
	for k := range r.Folds {
		var trainIdx, testIdx []int
		for i, f := range fold {
			if f == k {
				testIdx = append(testIdx, i)
			} else {
				trainIdx = append(trainIdx, i)
			}
		}
		counts := map[string]int{}
		var nbDocs [][]string
		var nbY []int
		for _, i := range trainIdx {
			for _, w := range tokens[i] {
				counts[w]++
			}
			nbDocs = append(nbDocs, tokens[i])
			nbY = append(nbY, labels[i])
		}
		cfg := Config{Dim: r.Dim, Widths: r.Widths, Filters: r.Filters, Buckets: r.Buckets}
		m, err := New(cfg, TokenizerSettings{}, []string{"negative", "positive"}, BuildWords(counts, r.MinCount, 0), 1)
		if err != nil {
			t.Fatal(err)
		}
		ex := func(i int) Example {
			var rows []int32
			for _, w := range tokens[i] {
				rows = append(rows, m.Vocab.Row([]byte(w)))
			}
			return Example{Rows: rows, Label: labels[i]}
		}
		sub := make([]int, len(trainIdx))
		for j, i := range trainIdx {
			sub[j] = labels[i]
		}
		tr, dv := StratifiedSplit(sub, r.DevFraction, r.Seed+uint64(k))
		var f uciFold
		f.Rows = m.Rows()
		for _, j := range tr {
			f.Train = append(f.Train, ex(trainIdx[j]))
		}
		for _, j := range dv {
			f.Dev = append(f.Dev, ex(trainIdx[j]))
		}
		b, err := nb.Fit(nbDocs, nbY, 2, 1)
		if err != nil {
			t.Fatal(err)
		}
		var gold, pred []int
		for _, i := range testIdx {
			f.Test = append(f.Test, ex(i))
			gold = append(gold, labels[i])
			pred = append(pred, b.Predict(tokens[i]))
		}
		f.nbAcc = Accuracy(gold, pred)
		out = append(out, f)
	}
	return out
}

func uciTrainGo(t *testing.T, f uciFold, k int) float64 {
	r := uciRecipe
	cfg := Config{Dim: r.Dim, Widths: r.Widths, Filters: r.Filters, Buckets: r.Buckets}
	// The words only fix the row count here; the examples already hold rows.
	words := make([]string, f.Rows-1-r.Buckets)
	for i := range words {
		words[i] = strconv.Itoa(i)
	}
	m, err := New(cfg, TokenizerSettings{}, []string{"negative", "positive"}, words, r.Seed+uint64(k))
	if err != nil {
		t.Fatal(err)
	}
	_, err = Train(m, f.Train, f.Dev, TrainOptions{Epochs: r.Epochs, Patience: r.Patience, Batch: r.Batch,
		Seed: r.Seed + uint64(k), Jobs: 2, Opt: r.Opt, Dropout: r.Dropout, MaxNorm: r.MaxNorm})
	if err != nil {
		t.Fatal(err)
	}
	p := paramsFrom(m)
	p.pack()
	w := newTrainWorker(p)
	var gold, pred []int
	for _, e := range f.Test {
		gold = append(gold, e.Label)
		pred = append(pred, trArgmax(w.forward(p, e.Rows, 0, 0, 0)))
	}
	return Accuracy(gold, pred)
}

// uciTrainTorch runs the reference trainer on the same folds and returns
// its test accuracy per fold and its training wall time in seconds.
func uciTrainTorch(t *testing.T, folds []uciFold) ([]float64, float64) {
	r := uciRecipe
	var fs []map[string]any
	for _, f := range folds {
		fs = append(fs, map[string]any{"train": f.Train, "dev": f.Dev, "test": f.Test, "rows": f.Rows})
	}
	in := map[string]any{"dim": r.Dim, "widths": r.Widths, "filters": r.Filters, "epochs": r.Epochs,
		"patience": r.Patience, "batch": r.Batch, "dropout": r.Dropout, "max_norm": r.MaxNorm,
		"optimizer": r.Opt, "lr": 1.0, "seed": r.Seed, "labels": 2, "threads": 2, "folds": fs}
	if r.Opt == OptAdam {
		in["lr"] = AdamLearningRate
	}
	out := runTorch(t, "torch_train.py", in)
	var res struct {
		Accuracy []float64 `json:"accuracy"`
		Seconds  float64   `json:"seconds"`
	}
	if err := json.Unmarshal(out, &res); err != nil {
		t.Fatalf("torch_train.py: %v: %s", err, strings.TrimSpace(string(out)))
	}
	if len(res.Accuracy) != len(folds) {
		t.Fatalf("torch_train.py: %d folds, want %d", len(res.Accuracy), len(folds))
	}
	return res.Accuracy, res.Seconds
}

func meanStd(x []float64) (float64, float64) {
	var s, ss float64
	for _, v := range x {
		s += v
	}
	m := s / float64(len(x))
	for _, v := range x {
		ss += (v - m) * (v - m)
	}
	if len(x) < 2 {
		return m, 0
	}
	return m, math.Sqrt(ss / float64(len(x)-1))
}
