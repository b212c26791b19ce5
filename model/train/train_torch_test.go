package train

import (
	"convtag/model"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"convtag/model/token"
)

// TestTrainMatchesTorch trains the same small network from the same
// weights on the same batches (the orders Train shuffles) in convtag and in
// PyTorch (testdata/torch_train.py, Debian's python3-torch, float32), three
// epochs without dropout and with a max-norm small enough to bite, and
// compares every final tensor: the optimisers (Adadelta and Adam with the
// lazy embedding updates), the loss scaling, max-norm and the masking of
// short texts must agree, not only the gradients of one batch. Tolerance:
// each tensor's largest difference within 1e-5 of its largest value, for
// float32 rounding in different summation orders (measured: at most
// 3e-7 of the largest value); and training must have moved every tensor by
// far more than that difference.
func TestTrainMatchesTorch(t *testing.T) {
	requireTorch(t)
	for _, opt := range []string{OptAdadelta, OptAdam} {
		t.Run(opt, func(t *testing.T) {
			cfg := model.Config{Dim: 16, Widths: []int{3, 4, 5}, Filters: 20, Buckets: 5}
			var words []string
			for i := range 30 {
				words = append(words, fmt.Sprintf("w%d", i))
			}
			m, err := model.New(cfg, token.Settings{}, []string{"a", "b", "c"}, words, 5)
			if err != nil {
				t.Fatal(err)
			}
			rng := rand.New(rand.NewPCG(4, 4))
			var train []Example
			for i := range 45 {
				rows := make([]int32, rng.IntN(15))
				for j := range rows {
					rows[j] = int32(1 + rng.IntN(m.Rows()-1))
				}
				train = append(train, Example{Rows: rows, Label: (i + len(rows)) % 3})
			}
			init := map[string][]float32{}
			for name, v := range fileTensors(m) {
				init[name] = append([]float32(nil), v...)
			}
			const epochs, seed = 3, 11
			opts := TrainOptions{Epochs: epochs, Patience: -1, Batch: 8, Seed: seed, Jobs: 2, Opt: opt, Dropout: -1, MaxNorm: 0.5}
			if _, err := Train(m, train, nil, opts); err != nil {
				t.Fatal(err)
			}
			var orders [][]int
			for e := 1; e <= epochs; e++ {
				o := make([]int, len(train))
				epochOrder(o, seed, e)
				orders = append(orders, o)
			}
			lr := 1.0
			if opt == OptAdam {
				lr = AdamLearningRate
			}
			out := runTorch(t, "torch_train.py", map[string]any{"dim": cfg.Dim, "widths": cfg.Widths, "filters": cfg.Filters,
				"epochs": epochs, "patience": -1, "batch": opts.Batch, "dropout": 0, "max_norm": opts.MaxNorm,
				"optimizer": opt, "lr": lr, "seed": 1, "labels": 3, "threads": 1, "return_weights": true,
				"folds": []map[string]any{{"train": train, "dev": []Example{}, "test": []Example{}, "rows": m.Rows(),
					"init": init, "orders": orders}}})
			var res struct{ Weights []map[string][]float64 }
			if err := json.Unmarshal(out, &res); err != nil || len(res.Weights) != 1 {
				t.Fatalf("torch_train.py: %v: %.200s", err, out)
			}
			capped := 0
			for c := range m.Out.Out {
				var ss float64
				for _, v := range m.Out.W[c*m.Out.In : (c+1)*m.Out.In] {
					ss += float64(v) * float64(v)
				}
				if math.Abs(math.Sqrt(ss)-opts.MaxNorm) < 1e-4 {
					capped++
				}
			}
			if capped == 0 {
				t.Errorf("no output row ends at the max-norm cap %g: the check does not exercise it", opts.MaxNorm)
			}
			ours := fileTensors(m)
			if len(res.Weights[0]) != len(ours) {
				t.Errorf("torch returned %d tensors, we have %d", len(res.Weights[0]), len(ours))
			}
			for name, a := range ours {
				b := res.Weights[0][name]
				if len(a) != len(b) {
					t.Errorf("%s: %d values, torch %d", name, len(a), len(b))
					continue
				}
				var maxRef, maxDiff, moved float64
				for i := range a {
					maxRef = math.Max(maxRef, math.Abs(b[i]))
					maxDiff = math.Max(maxDiff, math.Abs(float64(a[i])-b[i]))
					moved = math.Max(moved, math.Abs(b[i]-float64(init[name][i])))
				}
				t.Logf("%s: largest difference %.3g, largest value %.3g, largest change in training %.3g", name, maxDiff, maxRef, moved)
				if maxRef == 0 || maxDiff > 1e-5*maxRef {
					t.Errorf("%s: largest difference %.3g against largest value %.3g", name, maxDiff, maxRef)
				}
				if moved < 100*maxDiff {
					t.Errorf("%s: training moved it by at most %.3g, not far beyond the difference %.3g", name, moved, maxDiff)
				}
			}
		})
	}
}

// fileTensors returns m's tensors under their file names (no hidden layer).
func fileTensors(m *model.Model) map[string][]float32 {
	t := map[string][]float32{"embedding": m.Emb, "output.weight": m.Out.W, "output.bias": m.Out.B}
	for i, c := range m.Convs {
		t[fmt.Sprintf("convs.%d.weight", i)], t[fmt.Sprintf("convs.%d.bias", i)] = c.W, c.B
	}
	return t
}
