package train

import (
	"bytes"
	"convtag/model"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"convtag/model/token"
)

// multiNet returns tinyNet's network in multi-label mode and a batch whose
// tag sets cover none, one and several labels.
func multiNet(t *testing.T, hidden int, seed uint64) (*model.Model, []Example) {
	m, ex := tinyNet(t, hidden, seed)
	m.Multi = true
	sets := [][]int{{}, {0}, {1, 2}, {0, 1, 2}, {2}, {0, 2}}
	for i := range ex {
		ex[i].Tags = sets[i%len(sets)]
	}
	return m, ex
}

// batchGradMulti is batchGrad for a multi-label network: the mean binary
// cross-entropy over records and labels, pw weighting the positive terms.
func batchGradMulti(p *netParams, ex []Example, pw []float32) (float64, *netGrads) {
	p.pack()
	w := newTrainWorker(p)
	w.reset()
	n := float64(len(ex) * p.C)
	for i := range ex {
		w.exampleMulti(p, &ex[i], pw, float32(1/n), 0, 0, 0)
	}
	return w.loss / n, w.g
}

// TestGradientFiniteDifferenceMulti is TestGradientFiniteDifference for the
// binary cross-entropy of a multi-label network, with positive weights.
func TestGradientFiniteDifferenceMulti(t *testing.T) {
	for _, hidden := range []int{0, 6} {
		t.Run(fmt.Sprintf("hidden=%d", hidden), func(t *testing.T) {
			m, ex := multiNet(t, hidden, 11)
			p := paramsFrom(m)
			if !p.multi {
				t.Fatal("paramsFrom lost the mode")
			}
			pw := []float32{1, 3, 0.5}
			_, g := batchGradMulti(p, ex, pw)
			names, params, grads := namedTensors(p, g)
			base := kinkSignature(p, ex)
			const h = 1e-2
			skipped, checked := 0, 0
			for ti, name := range names {
				par, an := params[ti], slices.Clone(grads[ti])
				for i := range par {
					if ti == 0 && i < p.d {
						if an[i] != 0 {
							t.Fatalf("padding row has gradient %g", an[i])
						}
						continue
					}
					old := par[i]
					par[i] = old + h
					lp, _ := batchGradMulti(p, ex, pw)
					sp := kinkSignature(p, ex)
					par[i] = old - h
					lm, _ := batchGradMulti(p, ex, pw)
					sm := kinkSignature(p, ex)
					par[i] = old
					if sp != base || sm != base {
						skipped++
						continue
					}
					checked++
					fd := (lp - lm) / (2 * h)
					if d := math.Abs(fd - float64(an[i])); d > 2e-3*math.Max(1, math.Abs(float64(an[i]))) {
						t.Errorf("%s[%d]: analytic %.6g, finite difference %.6g", name, i, an[i], fd)
					}
				}
			}
			if skipped > checked/20 {
				t.Errorf("skipped %d of %d coordinates at kinks", skipped, skipped+checked)
			}
			t.Logf("checked %d coordinates, %d skipped at kinks", checked, skipped)
		})
	}
}

// TestGradientTorchMulti compares the loss and the gradient of every tensor
// with PyTorch autograd on torch.nn.BCEWithLogitsLoss(pos_weight=...)
// (Debian's python3-torch, testdata/torch_grad.py with "multi"), with the
// tolerances of TestGradientTorch.
func TestGradientTorchMulti(t *testing.T) {
	requireTorch(t)
	for _, hidden := range []int{0, 7} {
		t.Run(fmt.Sprintf("hidden=%d", hidden), func(t *testing.T) {
			cfg := model.Config{Dim: 16, Widths: []int{3, 4, 5}, Filters: 20, Hidden: hidden, Buckets: 5}
			var words []string
			for i := range 30 {
				words = append(words, fmt.Sprintf("w%d", i))
			}
			m, err := model.New(cfg, token.Settings{}, []string{"a", "b", "c", "d"}, words, 5)
			if err != nil {
				t.Fatal(err)
			}
			m.Multi = true
			rng := rand.New(rand.NewPCG(9, 9))
			var ex []Example
			for range 12 {
				rows := make([]int32, rng.IntN(15))
				for j := range rows {
					rows[j] = int32(rng.IntN(m.Rows()))
				}
				var tags []int
				for c := range 4 {
					if rng.IntN(3) == 0 {
						tags = append(tags, c)
					}
				}
				ex = append(ex, Example{Rows: rows, Tags: tags})
			}
			pw := []float32{1, 0.5, 2, 4}
			p := paramsFrom(m)
			loss, g := batchGradMulti(p, ex, pw)
			names, _, grads := namedTensors(p, g)
			mm := *m
			mm.Convs = slices.Clone(m.Convs)
			gm := &netParams{d: p.d, widths: p.widths, F: p.F, emb: grads[0], conv: grads[1 : 1+len(p.conv)], convB: grads[1+len(p.conv) : 1+2*len(p.conv)]}
			if hidden > 0 {
				h := *m.Hidden
				mm.Hidden = &h
				gm.hidW, gm.hidB = grads[len(grads)-4], grads[len(grads)-3]
			}
			gm.outW, gm.outB = grads[len(grads)-2], grads[len(grads)-1]
			gm.writeTo(&mm)
			ours := map[string][]float32{"embedding": mm.Emb, "output.weight": mm.Out.W, "output.bias": mm.Out.B}
			tensors := map[string][]float32{"embedding": m.Emb, "output.weight": m.Out.W, "output.bias": m.Out.B}
			for i := range mm.Convs {
				ours[fmt.Sprintf("convs.%d.weight", i)], ours[fmt.Sprintf("convs.%d.bias", i)] = mm.Convs[i].W, mm.Convs[i].B
				tensors[fmt.Sprintf("convs.%d.weight", i)], tensors[fmt.Sprintf("convs.%d.bias", i)] = m.Convs[i].W, m.Convs[i].B
			}
			if hidden > 0 {
				ours["hidden.weight"], ours["hidden.bias"] = mm.Hidden.W, mm.Hidden.B
				tensors["hidden.weight"], tensors["hidden.bias"] = m.Hidden.W, m.Hidden.B
			}
			in := map[string]any{"dim": cfg.Dim, "widths": cfg.Widths, "filters": cfg.Filters, "hidden": hidden,
				"rows": m.Rows(), "tensors": tensors, "examples": ex, "class_weights": pw, "multi": true}
			var out struct {
				Loss  float64
				Grads map[string][]float64
			}
			if err := json.Unmarshal(runTorch(t, "torch_grad.py", in), &out); err != nil {
				t.Fatal(err)
			}
			if math.Abs(loss-out.Loss) > 1e-5*math.Abs(out.Loss) {
				t.Errorf("loss %.8g, torch %.8g", loss, out.Loss)
			}
			if len(out.Grads) != len(names) {
				t.Errorf("torch returned %d tensors, we have %d", len(out.Grads), len(names))
			}
			for _, name := range names {
				a, b := ours[name], out.Grads[name]
				if len(a) != len(b) {
					t.Errorf("%s: %d values, torch %d", name, len(a), len(b))
					continue
				}
				var maxRef, maxDiff float64
				for i := range a {
					maxRef = math.Max(maxRef, math.Abs(b[i]))
					maxDiff = math.Max(maxDiff, math.Abs(float64(a[i])-b[i]))
				}
				t.Logf("%s: largest difference %.3g, largest gradient %.3g", name, maxDiff, maxRef)
				if maxRef == 0 || maxDiff > 1e-4*maxRef {
					t.Errorf("%s: largest difference %.3g against largest gradient %.3g", name, maxDiff, maxRef)
				}
			}
		})
	}
}

// multiToy is a learnable multi-label property check, not a reference
// comparison: label c is present when marker row 1+c is in the text.
func multiToy(m *model.Model, n int, seed uint64) []Example {
	rng := rand.New(rand.NewPCG(seed, 5))
	var ex []Example
	for range n {
		rows := make([]int32, 3+rng.IntN(10))
		for j := range rows {
			rows[j] = int32(4 + rng.IntN(m.Rows()-4))
		}
		var tags []int
		for c := range 3 {
			if rng.IntN(3) == 0 {
				tags = append(tags, c)
				rows[rng.IntN(len(rows))] = int32(1 + c)
			}
		}
		// A marker can overwrite another; the tags follow the text.
		tags = tags[:0]
		for c := range 3 {
			if slices.Contains(rows, int32(1+c)) {
				tags = append(tags, c)
			}
		}
		ex = append(ex, Example{Rows: rows, Tags: tags})
	}
	return ex
}

func multiModel(t *testing.T) *model.Model {
	t.Helper()
	cfg := model.Config{Dim: 8, Widths: []int{2, 3}, Filters: 12, Buckets: 7}
	words := []string{"p", "q", "r", "s", "t", "u", "v", "w", "x", "y"}
	m, err := model.New(cfg, token.Settings{}, []string{"a", "b", "c"}, words, 4)
	if err != nil {
		t.Fatal(err)
	}
	m.Multi = true
	return m
}

// TestTrainMultiDeterministic: the same seed and -j give bit-identical
// weights and thresholds in multi-label mode, for both optimisers.
func TestTrainMultiDeterministic(t *testing.T) {
	for _, opt := range []string{OptAdadelta, OptAdam} {
		for _, jobs := range []int{1, 2, 3} {
			var first []byte
			var firstTh []float64
			for run := range 2 {
				m := multiModel(t)
				train, dev := multiToy(m, 130, 1), multiToy(m, 40, 2)
				if _, err := Train(m, train, dev, TrainOptions{Epochs: 3, Seed: 8, Jobs: jobs, Opt: opt, Batch: 7}); err != nil {
					t.Fatal(err)
				}
				if run == 0 {
					first, firstTh = tensorBits(m), m.Thresholds
				} else if !bytes.Equal(first, tensorBits(m)) || !slices.Equal(firstTh, m.Thresholds) {
					t.Errorf("%s -j %d: two multi-label runs with the same seed differ", opt, jobs)
				}
			}
		}
	}
}

// TestTrainMultiLearns: the toy task is learnt (dev micro-F1 at 0.5 near
// 1), thresholds are set per label, and a saved model reopens with its mode
// and thresholds and gives the same sigmoid outputs.
func TestTrainMultiLearns(t *testing.T) {
	m := multiModel(t)
	res, err := Train(m, multiToy(m, 400, 1), multiToy(m, 100, 2), TrainOptions{Epochs: 60, Patience: 8, Seed: 8})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("dev micro-F1 at 0.5: %.3f after %d epochs (best %d); thresholds %v", res.DevMicroF1, res.EpochsRun, res.BestEpoch, m.Thresholds)
	if res.DevMicroF1 < 0.97 {
		t.Errorf("dev micro-F1 %.3f after %d epochs, want >= 0.97", res.DevMicroF1, res.EpochsRun)
	}
	if len(m.Thresholds) != 3 || len(res.Thresholds) != 3 {
		t.Fatalf("thresholds %v, %+v", m.Thresholds, res.Thresholds)
	}
	for c, lt := range res.Thresholds {
		if !lt.Tuned || lt.Threshold != m.Thresholds[c] || lt.F1 < 0.95 {
			t.Errorf("label %d: %+v (model threshold %v)", c, lt, m.Thresholds[c])
		}
	}
	var buf bytes.Buffer
	if err := m.Encode(&buf, model.SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	back, err := model.Load(buf.Bytes(), "multi")
	if err != nil {
		t.Fatal(err)
	}
	if !back.Multi || !slices.Equal(back.Thresholds, m.Thresholds) {
		t.Fatalf("reopened: multi %v thresholds %v, want %v", back.Multi, back.Thresholds, m.Thresholds)
	}
	ex := multiToy(m, 5, 9)
	p, q := m.NewPredictor(), back.NewPredictor()
	for _, e := range ex {
		a, b := slices.Clone(p.PredictRows(e.Rows)), q.PredictRows(e.Rows)
		sum := 0.0
		for c := range a {
			if a[c] != b[c] {
				t.Errorf("reopened model gives %v, built %v", b, a)
			}
			sum += float64(a[c])
			if z := float64(p.Logits()[c]); math.Abs(float64(a[c])-1/(1+math.Exp(-z))) > 1e-6 {
				t.Errorf("probability %v is not the sigmoid of logit %v", a[c], z)
			}
		}
	}
}

// TestThresholdGoalPrecision: with a precision goal every tuned label's
// dev precision reaches it.
func TestThresholdGoalPrecision(t *testing.T) {
	m := multiModel(t)
	res, err := Train(m, multiToy(m, 200, 1), multiToy(m, 100, 2), TrainOptions{Epochs: 2, Seed: 8, ThresholdGoal: ThresholdGoal{Precision: 0.9}})
	if err != nil {
		t.Fatal(err)
	}
	for _, lt := range res.Thresholds {
		if lt.Reached && lt.Precision < 0.9 {
			t.Errorf("%+v: reached but precision below 0.9", lt)
		}
	}
	for _, s := range []string{"f1", "precision:0.8", "precision:1"} {
		g, err := ParseThresholdGoal(s)
		if err != nil || g.String() != s {
			t.Errorf("ParseThresholdGoal(%q) = %v, %v", s, g, err)
		}
	}
	for _, s := range []string{"precision", "precision:0", "precision:1.5", "recall:0.5", "F1"} {
		if _, err := ParseThresholdGoal(s); err == nil {
			t.Errorf("ParseThresholdGoal(%q): no error", s)
		}
	}
}

func TestBalancedPositiveWeights(t *testing.T) {
	ex := []Example{{Tags: []int{0}}, {Tags: []int{0, 1}}, {Tags: []int{0}}, {}}
	// PyTorch's BCEWithLogitsLoss documentation: pos_weight = negatives /
	// positives per label (100 positives and 300 negatives give 3).
	got := BalancedPositiveWeights(ex, 3)
	want := []float64{1.0 / 3, 3, 1}
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-12 {
			t.Errorf("weight %d = %g, want %g", i, got[i], want[i])
		}
	}
}

func TestTrainRejectsTags(t *testing.T) {
	m, _ := multiNet(t, 0, 1)
	for _, tags := range [][]int{{3}, {-1}, {1, 1}} {
		if _, err := Train(m, []Example{{Rows: []int32{1}, Tags: tags}}, nil, TrainOptions{Epochs: 1}); err == nil {
			t.Errorf("tags %v: no error", tags)
		}
	}
}
