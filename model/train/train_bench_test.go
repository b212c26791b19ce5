package train

import (
	"bytes"
	"convtag/model"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"testing"
	"time"

	"convtag/model/internal/uci"
	"convtag/model/token"
)

// benchData returns the UCI sentences as examples for a model of dimension
// d with 3 x 100 filters, split 80/20 (stratified, seed 1).
func benchData(b *testing.B, d int) (*model.Model, []Example, []Example) {
	b.Helper()
	dir, err := uci.CacheDir()
	if err != nil {
		b.Fatal(err)
	}
	s, err := uci.Fetch(dir)
	if err != nil {
		b.Skip(err)
	}
	tok := token.New(token.Settings{})
	var ts token.Tokens
	counts := map[string]int{}
	labels := make([]int, len(s))
	for i, x := range s {
		CountTokens(counts, tok, &ts, []byte(x.Text))
		if x.Label == "positive" {
			labels[i] = 1
		}
	}
	cfg := model.Config{Dim: d, Widths: []int{3, 4, 5}, Filters: 100, Buckets: 1000}
	m, err := model.New(cfg, token.Settings{}, []string{"negative", "positive"}, BuildWords(counts, 2, 0), 1)
	if err != nil {
		b.Fatal(err)
	}
	tr, dv := StratifiedSplit(labels, 0.2, 1)
	ex := func(idx []int) []Example {
		var out []Example
		for _, i := range idx {
			out = append(out, Example{Rows: m.AppendRows(nil, &ts, []byte(s[i].Text)), Label: labels[i]})
		}
		return out
	}
	return m, ex(tr), ex(dv)
}

func tokensOf(ex []Example) int {
	n := 0
	for _, e := range ex {
		n += max(1, len(e.Rows))
	}
	return n
}

// BenchmarkTrainEpoch is one training epoch over 2,400 UCI sentences on
// 2 workers, 3 x 100 filters, at d = 128 and d = 300. SetBytes counts
// tokens, so MB/s reads as millions of tokens per second.
func BenchmarkTrainEpoch(b *testing.B) {
	for _, d := range []int{128, 300} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			m, train, _ := benchData(b, d)
			emb := append([]float32(nil), m.Emb...)
			b.SetBytes(int64(tokensOf(train)))
			b.ReportAllocs()
			for b.Loop() {
				copy(m.Emb, emb)
				if _, err := Train(m, train, nil, TrainOptions{Epochs: 1, Patience: -1, Jobs: 2, Seed: 1}); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(tokensOf(train))*float64(b.N)/b.Elapsed().Seconds(), "tokens/s")
		})
	}
}

// BenchmarkTrainVsTorch trains 10 epochs over the same 2,400 UCI
// sentences with the same recipe (3 x 100 filters, Adadelta, batch 50,
// dropout 0.5, max-norm 3, dev accuracy every epoch, no early stopping),
// at d = 128 and d = 300, in convtag on 2 workers and in PyTorch
// (testdata/torch_train.py, Debian's python3-torch, timed by the script
// around training only) on 1 and on 2 threads, and reports the ratio of
// convtag's wall time to the faster PyTorch's, measured in the same run.
// Each side's time is its best of max(b.N, 2) runs; tokens/s counts
// training tokens (windows) over the 10 epochs. The load average is
// logged: on a shared machine PyTorch's threads suffer from it most.
func BenchmarkTrainVsTorch(b *testing.B) {
	requireTorch(b)
	for _, d := range []int{128, 300} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			const epochs = 10
			m, train, dev := benchData(b, d)
			init := tensorBits(m)
			logLoad(b, "before")
			opt := TrainOptions{Epochs: epochs, Patience: -1, Jobs: 2, Seed: 1}
			goSec := math.Inf(1)
			for b.Loop() {
				setTensorBits(m, init)
				start := time.Now()
				if _, err := Train(m, train, dev, opt); err != nil {
					b.Fatal(err)
				}
				goSec = min(goSec, time.Since(start).Seconds())
			}
			if b.N < 2 {
				setTensorBits(m, init)
				start := time.Now()
				if _, err := Train(m, train, dev, opt); err != nil {
					b.Fatal(err)
				}
				goSec = min(goSec, time.Since(start).Seconds())
			}
			torchSec := map[int]float64{}
			for _, threads := range []int{1, 2} {
				torchSec[threads] = math.Inf(1)
				for range max(b.N, 2) {
					out := runTorch(b, "torch_train.py", map[string]any{"dim": d, "widths": []int{3, 4, 5}, "filters": 100,
						"epochs": epochs, "patience": -1, "batch": DefaultBatch, "dropout": DefaultDropout,
						"max_norm": float64(DefaultMaxNorm), "optimizer": OptAdadelta, "lr": 1.0, "seed": 1, "labels": 2,
						"threads": threads,
						"folds":   []map[string]any{{"train": train, "dev": dev, "test": []Example{}, "rows": m.Rows()}}})
					var res struct{ Seconds float64 }
					if err := json.Unmarshal(out, &res); err != nil || res.Seconds <= 0 {
						b.Fatalf("torch_train.py: %v: %s", err, out)
					}
					torchSec[threads] = min(torchSec[threads], res.Seconds)
				}
			}
			logLoad(b, "after")
			best := min(torchSec[1], torchSec[2])
			tokens := float64(epochs * tokensOf(train))
			b.ReportMetric(goSec, "convtag-s")
			b.ReportMetric(torchSec[1], "torch1-s")
			b.ReportMetric(torchSec[2], "torch2-s")
			b.ReportMetric(goSec/best, "ratio")
			b.ReportMetric(tokens/goSec, "convtag-tok/s")
			b.ReportMetric(tokens/best, "torch-tok/s")
		})
	}
}

// setTensorBits restores the weights tensorBits(m) returned.
func setTensorBits(m *model.Model, bits []byte) {
	get := func(s []float32) {
		for i := range s {
			s[i] = math.Float32frombits(binary.LittleEndian.Uint32(bits))
			bits = bits[4:]
		}
	}
	get(m.Emb)
	for _, c := range m.Convs {
		get(c.W)
		get(c.B)
	}
	get(m.Out.W)
	get(m.Out.B)
}

// logLoad logs the 1-minute load average where /proc has it.
func logLoad(b *testing.B, when string) {
	if l, err := os.ReadFile("/proc/loadavg"); err == nil {
		b.Logf("load average %s: %s", when, bytes.TrimSpace(l))
	}
}
