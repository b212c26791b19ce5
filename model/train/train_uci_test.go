package train

import (
	"bytes"
	"convtag/model"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"convtag/model/internal/uci"
	"convtag/model/metrics"
	"convtag/model/nb"
	"convtag/model/token"
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
	k                int // index within its set
	nbAcc            float64
}

// uciSet is one cross-validation: the sentences of the named sources.
type uciSet struct {
	name    string
	sources []string
}

// uciSets are the sets CONVTAG_UCI_SOURCES asks for: unset or "1", the
// three sources joined and each on its own; "0", joined only; "only", each
// source only.
func uciSets() []uciSet {
	var sets []uciSet
	v := os.Getenv("CONVTAG_UCI_SOURCES")
	if v != "only" {
		sets = append(sets, uciSet{"joined", uci.Sources})
	}
	if v != "0" {
		for _, s := range uci.Sources {
			sets = append(sets, uciSet{s, []string{s}})
		}
	}
	return sets
}

// TestUCICrossValidation runs stratified k-fold cross-validation on the
// UCI Sentiment Labelled Sentences (Kotzias et al. 2015; fetched from npm
// sentiment@5.0.2) joined and per source, for the network and the
// naive-Bayes baseline, and trains the same network with the same recipe,
// tokens, vocabulary and folds in PyTorch (testdata/torch_train.py). On
// the joined set (300 test sentences a fold) the network's mean accuracy
// must be within 2 points of PyTorch's, and the baseline's mean near 0.83
// (measured 0.834 +- 0.018 for uni+bigram naive Bayes, 10-fold, in the
// issue; we accept 0.80..0.86). Per source (100 test sentences a fold) the
// three figures are logged, not checked: there the spread between two
// trainings of the same recipe is about as large as the tolerance.
//
// PyTorch runs on one thread in three processes, the folds dealt out by
// size, beside the Go trainer on one worker, all sharing the two cores;
// the logged times are of that shared run, not benchmarks.
func TestUCICrossValidation(t *testing.T) {
	uciEnabled(t)
	requireTorch(t)
	sentences := uciSentences(t)
	r := uciRecipe
	if v := os.Getenv("CONVTAG_UCI_FOLDS"); v != "" {
		k, err := strconv.Atoi(v)
		if err != nil || k < 2 {
			t.Fatalf("CONVTAG_UCI_FOLDS=%q: want a number of folds >= 2", v)
		}
		r.Folds = k
	}
	type setRun struct {
		uciSet
		folds []uciFold
		first int // index of the set's first fold in all
	}
	var runs []*setRun
	var all []uciFold
	for _, set := range uciSets() {
		var texts []string
		var labels []int
		for _, s := range sentences {
			if slices.Contains(set.sources, s.Source) {
				texts = append(texts, s.Text)
				l := 0
				if s.Label == "positive" {
					l = 1
				}
				labels = append(labels, l)
			}
		}
		run := &setRun{uciSet: set, folds: uciFolds(t, texts, labels, r.Folds), first: len(all)}
		all = append(all, run.folds...)
		runs = append(runs, run)
	}
	torch := startTorchPool(t, all, 3)
	ours := make([]float64, len(all))
	goTime := make([]time.Duration, len(runs))
	for i, run := range runs {
		start := time.Now()
		for k, f := range run.folds {
			acc, epochs := uciTrainGo(t, f, k, 1)
			ours[run.first+k] = acc
			t.Logf("%s fold %d: network %.4f (%d epochs)", run.name, k+1, acc, epochs)
		}
		goTime[i] = time.Since(start)
	}
	ref, refEpochs, refSec := torch.wait(t)
	t.Logf("pytorch: %.0fs of training in all (1 thread a process, sharing the cores)", refSec)
	for i, run := range runs {
		var o, p, nb []float64
		for k, f := range run.folds {
			j := run.first + k
			o, p, nb = append(o, ours[j]), append(p, ref[j]), append(nb, f.nbAcc)
			t.Logf("%s fold %d: network %.4f  pytorch %.4f (%d epochs)  naive Bayes %.4f", run.name, k+1, ours[j], ref[j], refEpochs[j], f.nbAcc)
		}
		mo, so := meanStd(o)
		mr, sr := meanStd(p)
		mb, sb := meanStd(nb)
		t.Logf("%s %d-fold: network %.4f +- %.4f (%.0fs), pytorch %.4f +- %.4f, naive Bayes %.4f +- %.4f",
			run.name, r.Folds, mo, so, goTime[i].Seconds(), mr, sr, mb, sb)
		if run.name != "joined" {
			continue
		}
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
func uciFolds(t *testing.T, texts []string, labels []int, folds int) []uciFold {
	r := uciRecipe
	r.Folds = folds
	tok := token.New(token.Settings{})
	var ts token.Tokens
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
		cfg := model.Config{Dim: r.Dim, Widths: r.Widths, Filters: r.Filters, Buckets: r.Buckets}
		m, err := model.New(cfg, token.Settings{}, []string{"negative", "positive"}, BuildWords(counts, r.MinCount, 0), 1)
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
		f := uciFold{Rows: m.Rows(), k: k}
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
		f.nbAcc = metrics.Accuracy(gold, pred)
		out = append(out, f)
	}
	return out
}

// uciTrainGo trains fold k's network on jobs workers and returns its test
// accuracy and the epochs run.
func uciTrainGo(t *testing.T, f uciFold, k, jobs int) (float64, int) {
	r := uciRecipe
	cfg := model.Config{Dim: r.Dim, Widths: r.Widths, Filters: r.Filters, Buckets: r.Buckets}
	// The words only fix the row count here; the examples already hold rows.
	words := make([]string, f.Rows-1-r.Buckets)
	for i := range words {
		words[i] = strconv.Itoa(i)
	}
	m, err := model.New(cfg, token.Settings{}, []string{"negative", "positive"}, words, r.Seed+uint64(k))
	if err != nil {
		t.Fatal(err)
	}
	res, err := Train(m, f.Train, f.Dev, TrainOptions{Epochs: r.Epochs, Patience: r.Patience, Batch: r.Batch,
		Seed: r.Seed + uint64(k), Jobs: jobs, Opt: r.Opt, Dropout: r.Dropout, MaxNorm: r.MaxNorm})
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
	return metrics.Accuracy(gold, pred), res.EpochsRun
}

// torchInput is testdata/torch_train.py's input: the recipe and the folds
// (fold k of a set is seeded with Seed+k on both sides).
func torchInput(folds []uciFold, seeds []uint64, threads int) map[string]any {
	r := uciRecipe
	var fs []map[string]any
	for i, f := range folds {
		fs = append(fs, map[string]any{"train": f.Train, "dev": f.Dev, "test": f.Test, "rows": f.Rows, "seed": seeds[i]})
	}
	in := map[string]any{"dim": r.Dim, "widths": r.Widths, "filters": r.Filters, "epochs": r.Epochs,
		"patience": r.Patience, "batch": r.Batch, "dropout": r.Dropout, "max_norm": r.MaxNorm,
		"optimizer": r.Opt, "lr": 1.0, "seed": r.Seed, "labels": 2, "threads": threads, "folds": fs}
	if r.Opt == OptAdam {
		in["lr"] = AdamLearningRate
	}
	return in
}

// torchResult is testdata/torch_train.py's output.
type torchResult struct {
	Accuracy []float64 `json:"accuracy"`
	Epochs   []int     `json:"epochs"`
	Seconds  float64   `json:"seconds"` // training and scoring, all folds
}

// torchPool is testdata/torch_train.py running in the background, in
// several single-threaded processes.
type torchPool struct {
	cmds   []*exec.Cmd
	idx    [][]int // per process, the indices of its folds
	stdout []*bytes.Buffer
	stderr []*bytes.Buffer
	n      int
	done   bool
}

// startTorchPool starts the reference trainer on folds in procs processes,
// each fold going to the process with the fewest training tokens so far
// (largest folds first); wait collects the results. The processes are
// killed if the test ends first. A fold is seeded with the recipe's seed
// plus its index within its set, as uciTrainGo does.
func startTorchPool(t *testing.T, folds []uciFold, procs int) *torchPool {
	t.Helper()
	tp := &torchPool{n: len(folds), idx: make([][]int, procs)}
	order := make([]int, len(folds))
	size := make([]int, len(folds))
	for i, f := range folds {
		order[i] = i
		size[i] = tokensOf(f.Train)
	}
	slices.SortStableFunc(order, func(a, b int) int { return size[b] - size[a] })
	load := make([]int, procs)
	for _, i := range order {
		p := 0
		for q := range load {
			if load[q] < load[p] {
				p = q
			}
		}
		load[p] += size[i]
		tp.idx[p] = append(tp.idx[p], i)
	}
	dir := t.TempDir()
	for p, idx := range tp.idx {
		if len(idx) == 0 {
			continue
		}
		var fs []uciFold
		var seeds []uint64
		for _, i := range idx {
			fs = append(fs, folds[i])
			seeds = append(seeds, uciRecipe.Seed+uint64(folds[i].k))
		}
		b, err := json.Marshal(torchInput(fs, seeds, 1))
		if err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, fmt.Sprintf("in%d.json", p))
		if err := os.WriteFile(path, b, 0o644); err != nil {
			t.Fatal(err)
		}
		cmd := exec.Command("/usr/bin/python3", filepath.Join("..", "..", "testdata", "torch_train.py"), path)
		var so, se bytes.Buffer
		cmd.Stdout, cmd.Stderr = &so, &se
		if err := cmd.Start(); err != nil {
			t.Fatalf("torch_train.py: %v", err)
		}
		tp.cmds, tp.stdout, tp.stderr = append(tp.cmds, cmd), append(tp.stdout, &so), append(tp.stderr, &se)
	}
	t.Cleanup(func() {
		if !tp.done {
			for _, c := range tp.cmds {
				c.Process.Kill()
				c.Wait()
			}
		}
	})
	return tp
}

// wait returns every fold's test accuracy and epochs run, in the order of
// the folds given to startTorchPool, and the processes' summed seconds.
func (tp *torchPool) wait(t *testing.T) (acc []float64, epochs []int, seconds float64) {
	t.Helper()
	acc, epochs = make([]float64, tp.n), make([]int, tp.n)
	var idx [][]int
	for _, x := range tp.idx {
		if len(x) > 0 {
			idx = append(idx, x)
		}
	}
	var failed error
	for p, cmd := range tp.cmds {
		if err := cmd.Wait(); err != nil && failed == nil {
			failed = fmt.Errorf("%v: %s", err, tp.stderr[p].String())
		}
	}
	tp.done = true
	if failed != nil {
		t.Fatalf("torch_train.py: %v", failed)
	}
	for p := range tp.cmds {
		var res torchResult
		if err := json.Unmarshal(tp.stdout[p].Bytes(), &res); err != nil {
			t.Fatalf("torch_train.py: %v: %s", err, strings.TrimSpace(tp.stdout[p].String()))
		}
		if len(res.Accuracy) != len(idx[p]) || len(res.Epochs) != len(idx[p]) {
			t.Fatalf("torch_train.py: %d folds, want %d", len(res.Accuracy), len(idx[p]))
		}
		for j, i := range idx[p] {
			acc[i], epochs[i] = res.Accuracy[j], res.Epochs[j]
		}
		seconds += res.Seconds
	}
	return acc, epochs, seconds
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
