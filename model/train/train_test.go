package train

import (
	"bytes"
	"convtag/model"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"testing"

	"convtag/model/internal/kernel"
	"convtag/model/token"
)

// tinyNet returns a small random network and a batch over its rows.
func tinyNet(t *testing.T, hidden int, seed uint64) (*model.Model, []Example) {
	t.Helper()
	cfg := model.Config{Dim: 5, Widths: []int{1, 2, 3}, Filters: 4, Hidden: hidden, Buckets: 3}
	words := []string{"a", "b", "c", "d", "e", "f"}
	m, err := model.New(cfg, token.Settings{}, []string{"x", "y", "z"}, words, seed)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(seed, 7))
	var ex []Example
	for i, n := range []int{0, 1, 2, 3, 5, 8} {
		rows := make([]int32, n)
		for j := range rows {
			rows[j] = int32(rng.IntN(m.Rows()))
		}
		ex = append(ex, Example{Rows: rows, Label: i % 3})
	}
	return m, ex
}

// batchGrad returns the batch's mean weighted loss (float64) and its
// gradient, computed as Train does (without dropout).
func batchGrad(p *netParams, ex []Example, cw []float32) (float64, *netGrads) {
	p.pack()
	w := newTrainWorker(p)
	w.reset()
	var sum float64
	for _, e := range ex {
		sum += float64(cw[e.Label])
	}
	for i := range ex {
		w.example(p, &ex[i], cw[ex[i].Label], float32(1/sum), 0, 0, 0)
	}
	return w.loss / sum, w.g
}

// kinkSignature records every discrete choice of the forward pass (winning
// positions and hidden ReLU states), so a finite difference that crosses a
// kink can be recognised and left out.
func kinkSignature(p *netParams, ex []Example) string {
	p.pack()
	w := newTrainWorker(p)
	var b bytes.Buffer
	for _, e := range ex {
		w.forward(p, e.Rows, 0, 0, 0)
		fmt.Fprint(&b, w.win)
		for _, h := range w.hid {
			fmt.Fprint(&b, h > 0)
		}
	}
	return b.String()
}

// namedTensors pairs each parameter tensor with its gradient; the
// embedding gradient is expanded to a dense matrix.
func namedTensors(p *netParams, g *netGrads) (names []string, params, grads [][]float32) {
	emb := make([]float32, len(p.emb))
	for si, r := range g.rows {
		copy(emb[int(r)*p.d:], g.embRow(si, p.d))
	}
	names = append(names, "embedding")
	params = append(params, p.emb)
	grads = append(grads, emb)
	nc := len(p.conv)
	for i := range nc {
		names = append(names, fmt.Sprintf("convs.%d.weight", i))
	}
	for i := range nc {
		names = append(names, fmt.Sprintf("convs.%d.bias", i))
	}
	if p.hidW != nil {
		names = append(names, "hidden.weight", "hidden.bias")
	}
	names = append(names, "output.weight", "output.bias")
	return names, append(params, p.list...), append(grads, g.list...)
}

// TestGradientFiniteDifference checks the analytic gradient of every
// parameter tensor against central finite differences of the float32 loss
// (step h = 1e-2, loss accumulated in float64). Coordinates whose step
// changes a max-pooling winner or a ReLU state are skipped, since the loss
// is not differentiable across those kinks; at most a few are allowed.
// Tolerance: |fd - analytic| <= 2e-3 * max(1, |analytic|), which covers
// the O(h^2) truncation and float32 rounding (about 1e-7 / h).
func TestGradientFiniteDifference(t *testing.T) {
	for _, hidden := range []int{0, 6} {
		t.Run(fmt.Sprintf("hidden=%d", hidden), func(t *testing.T) {
			m, ex := tinyNet(t, hidden, 11)
			p := paramsFrom(m)
			cw := []float32{1, 2, 0.5}
			_, g := batchGrad(p, ex, cw)
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
						continue // row 0 is never trained
					}
					old := par[i]
					par[i] = old + h
					lp, _ := batchGrad(p, ex, cw)
					sp := kinkSignature(p, ex)
					par[i] = old - h
					lm, _ := batchGrad(p, ex, cw)
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

func requireTorch(t testing.TB) {
	t.Helper()
	err := exec.Command("/usr/bin/python3", "-c", "import torch").Run()
	if err == nil {
		return
	}
	if os.Getenv("CI") == "true" {
		t.Fatalf("python3-torch is required under CI=true: %v", err)
	}
	t.Skipf("python3-torch not available: %v", err)
}

// TestGradientTorch compares the gradient of every tensor, for the same
// weights and batch, with PyTorch autograd (Debian's python3-torch) running
// testdata/torch_grad.py: weighted mean cross-entropy, no dropout. Each
// tensor's largest difference must be within 1e-4 of its largest gradient
// (relative), and the loss within 1e-5 relative.
func TestGradientTorch(t *testing.T) {
	requireTorch(t)
	for _, hidden := range []int{0, 7} {
		t.Run(fmt.Sprintf("hidden=%d", hidden), func(t *testing.T) {
			cfg := model.Config{Dim: 16, Widths: []int{3, 4, 5}, Filters: 20, Hidden: hidden, Buckets: 5}
			var words []string
			for i := range 30 {
				words = append(words, fmt.Sprintf("w%d", i))
			}
			m, err := model.New(cfg, token.Settings{}, []string{"a", "b", "c"}, words, 5)
			if err != nil {
				t.Fatal(err)
			}
			rng := rand.New(rand.NewPCG(9, 9))
			var ex []Example
			for i := range 12 {
				rows := make([]int32, rng.IntN(15))
				for j := range rows {
					rows[j] = int32(rng.IntN(m.Rows()))
				}
				ex = append(ex, Example{Rows: rows, Label: i % 3})
			}
			cw := []float32{1, 0.5, 2}
			p := paramsFrom(m)
			loss, g := batchGrad(p, ex, cw)
			names, _, grads := namedTensors(p, g)
			// Reference layouts: the file's, not the working one.
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
			for i, c := range mm.Convs {
				ours[fmt.Sprintf("convs.%d.weight", i)], ours[fmt.Sprintf("convs.%d.bias", i)] = c.W, c.B
			}
			if hidden > 0 {
				ours["hidden.weight"], ours["hidden.bias"] = mm.Hidden.W, mm.Hidden.B
			}
			tensors := map[string][]float32{"embedding": m.Emb, "output.weight": m.Out.W, "output.bias": m.Out.B}
			for i, c := range m.Convs {
				tensors[fmt.Sprintf("convs.%d.weight", i)], tensors[fmt.Sprintf("convs.%d.bias", i)] = c.W, c.B
			}
			if hidden > 0 {
				tensors["hidden.weight"], tensors["hidden.bias"] = m.Hidden.W, m.Hidden.B
			}
			in := map[string]any{"dim": cfg.Dim, "widths": cfg.Widths, "filters": cfg.Filters, "hidden": hidden,
				"rows": m.Rows(), "tensors": tensors, "examples": ex, "class_weights": cw}
			ref := runTorch(t, "torch_grad.py", in)
			var out struct {
				Loss  float64
				Grads map[string][]float64
			}
			if err := json.Unmarshal(ref, &out); err != nil {
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
				if maxRef == 0 || maxDiff > 1e-4*maxRef {
					t.Errorf("%s: largest difference %.3g against largest gradient %.3g", name, maxDiff, maxRef)
				}
			}
		})
	}
}

// runTorch writes in as JSON to a temporary file, runs the reference
// script on it and returns its standard output.
func runTorch(t testing.TB, script string, in any) []byte {
	t.Helper()
	b, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "in.json")
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("/usr/bin/python3", filepath.Join("..", "..", "testdata", script), path)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("%s: %v: %s", script, err, stderr.String())
	}
	return out
}

// toyTask is a learnable property check, not a reference comparison: the
// label is which of two marker rows the example holds.
func toyTask(m *model.Model, n int, seed uint64) []Example {
	rng := rand.New(rand.NewPCG(seed, 3))
	var ex []Example
	for i := range n {
		rows := make([]int32, 3+rng.IntN(10))
		for j := range rows {
			rows[j] = int32(3 + rng.IntN(m.Rows()-3))
		}
		rows[rng.IntN(len(rows))] = int32(1 + i%2)
		ex = append(ex, Example{Rows: rows, Label: i % 2})
	}
	return ex
}

func tensorBits(m *model.Model) []byte {
	var b bytes.Buffer
	put := func(s []float32) {
		for _, v := range s {
			u := math.Float32bits(v)
			b.Write([]byte{byte(u), byte(u >> 8), byte(u >> 16), byte(u >> 24)})
		}
	}
	put(m.Emb)
	for _, c := range m.Convs {
		put(c.W)
		put(c.B)
	}
	put(m.Out.W)
	put(m.Out.B)
	return b.Bytes()
}

// TestTrainDeterministic trains twice with the same seed and -j and wants
// identical weights bit for bit, for both optimisers and several -j.
func TestTrainDeterministic(t *testing.T) {
	cfg := model.Config{Dim: 8, Widths: []int{2, 3}, Filters: 6, Buckets: 7}
	words := []string{"p", "q", "r", "s", "t", "u", "v", "w", "x", "y"}
	for _, opt := range []string{OptAdadelta, OptAdam} {
		for _, jobs := range []int{1, 2, 3} {
			var first []byte
			for run := range 2 {
				m, err := model.New(cfg, token.Settings{}, []string{"no", "yes"}, words, 4)
				if err != nil {
					t.Fatal(err)
				}
				train, dev := toyTask(m, 130, 1), toyTask(m, 40, 2)
				if _, err := Train(m, train, dev, TrainOptions{Epochs: 3, Seed: 8, Jobs: jobs, Opt: opt, Batch: 7}); err != nil {
					t.Fatal(err)
				}
				if run == 0 {
					first = tensorBits(m)
				} else if !bytes.Equal(first, tensorBits(m)) {
					t.Errorf("%s -j %d: two runs with the same seed differ", opt, jobs)
				}
			}
		}
	}
}

// TestTrainSameOnEveryVectorSet trains with each vector kernel set (the
// AVX-512 one runs the two-panel convolution) and wants identical weights
// bit for bit.
func TestTrainSameOnEveryVectorSet(t *testing.T) {
	sets := kernel.All[1:]
	if len(sets) < 2 {
		t.Skip("fewer than two vector kernel sets on this CPU or build")
	}
	// 40 filters: two panel pairs and one single panel per width.
	cfg := model.Config{Dim: 24, Widths: []int{2, 3, 5}, Filters: 40, Buckets: 7}
	words := []string{"p", "q", "r", "s", "t", "u", "v", "w", "x", "y"}
	var first []byte
	for _, k := range sets {
		m, err := model.New(cfg, token.Settings{}, []string{"no", "yes"}, words, 4)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := Train(m, toyTask(m, 130, 1), toyTask(m, 40, 2), TrainOptions{Epochs: 2, Seed: 8, Jobs: 2, Batch: 7, kernels: k}); err != nil {
			t.Fatal(err)
		}
		if bits := tensorBits(m); first == nil {
			first = bits
		} else if !bytes.Equal(bits, first) {
			t.Errorf("training with the %s kernels gives other weights than with %s", k.Name, sets[0].Name)
		}
	}
}

// TestTrainLearns checks that training drives a separable toy task to
// perfect dev accuracy and that early stopping keeps the best epoch.
func TestTrainLearns(t *testing.T) {
	cfg := model.Config{Dim: 8, Widths: []int{2, 3}, Filters: 6, Buckets: 7}
	words := []string{"p", "q", "r", "s", "t", "u", "v", "w", "x", "y"}
	for _, opt := range []string{OptAdadelta, OptAdam} {
		t.Run(opt, func(t *testing.T) {
			m, err := model.New(cfg, token.Settings{}, []string{"no", "yes"}, words, 4)
			if err != nil {
				t.Fatal(err)
			}
			lr := 0.0
			if opt == OptAdam {
				lr = 1e-2
			}
			res, err := Train(m, toyTask(m, 400, 1), toyTask(m, 100, 2), TrainOptions{Epochs: 30, Patience: 4, Seed: 8, Opt: opt, LR: lr})
			if err != nil {
				t.Fatal(err)
			}
			if res.DevAcc < 0.98 {
				t.Errorf("dev accuracy %.3f after %d epochs, want >= 0.98", res.DevAcc, res.EpochsRun)
			}
			for _, e := range res.Curve {
				if e.DevAcc > res.DevAcc {
					t.Errorf("epoch %d had dev accuracy %.3f above the kept %.3f", e.Epoch, e.DevAcc, res.DevAcc)
				}
			}
			for c := 0; c < m.Out.Out; c++ {
				var ss float64
				for _, v := range m.Out.W[c*m.Out.In : (c+1)*m.Out.In] {
					ss += float64(v) * float64(v)
				}
				if math.Sqrt(ss) > DefaultMaxNorm*(1+1e-5) {
					t.Errorf("output row %d has norm %.4f above the cap", c, math.Sqrt(ss))
				}
			}
		})
	}
}

func TestTrainRejects(t *testing.T) {
	m, ex := tinyNet(t, 0, 1)
	for _, tc := range []struct {
		name  string
		train []Example
		opt   TrainOptions
	}{
		{"empty", nil, TrainOptions{}},
		{"label", []Example{{Rows: []int32{1}, Label: 5}}, TrainOptions{}},
		{"row", []Example{{Rows: []int32{int32(m.Rows())}, Label: 0}}, TrainOptions{}},
		{"optimizer", ex, TrainOptions{Opt: "sgd"}},
		{"weights", ex, TrainOptions{ClassWeights: []float64{1}}},
	} {
		if _, err := Train(m, tc.train, nil, tc.opt); err == nil {
			t.Errorf("%s: no error", tc.name)
		}
	}
}

func TestBalancedWeights(t *testing.T) {
	ex := []Example{{Label: 0}, {Label: 0}, {Label: 0}, {Label: 1}}
	// scikit-learn's compute_class_weight("balanced") gives n/(C*n_c) over
	// the C classes present: 4/(2*3) and 4/(2*1).
	got := BalancedWeights(ex, 3)
	want := []float64{4.0 / 6, 4.0 / 2, 0}
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-12 {
			t.Errorf("weight %d = %g, want %g", i, got[i], want[i])
		}
	}
}

// TestTrainStop closes Stop after a given mini-batch: training ends before
// the next one and Train returns ErrStopped; an open Stop changes nothing.
func TestTrainStop(t *testing.T) {
	cfg := model.Config{Dim: 8, Widths: []int{2, 3}, Filters: 6, Buckets: 7}
	words := []string{"p", "q", "r", "s", "t", "u", "v", "w", "x", "y"}
	for _, tc := range []struct {
		name      string
		stopAfter int // mini-batches before Stop closes; 0 never
		want      error
	}{
		{"first batch", 1, ErrStopped},
		{"second epoch", 25, ErrStopped},
		{"never", 0, nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m, err := model.New(cfg, token.Settings{}, []string{"no", "yes"}, words, 4)
			if err != nil {
				t.Fatal(err)
			}
			stop := make(chan struct{})
			batches := 0
			opt := TrainOptions{Epochs: 3, Seed: 8, Jobs: 2, Batch: 7, Stop: stop}
			opt.OnBatch = func(done, total int) {
				batches++
				if batches == tc.stopAfter {
					close(stop)
				}
			}
			res, err := Train(m, toyTask(m, 130, 1), toyTask(m, 40, 2), opt)
			if !errors.Is(err, tc.want) {
				t.Fatalf("Train: %v, want %v", err, tc.want)
			}
			if tc.want != nil && batches != tc.stopAfter {
				t.Errorf("%d mini-batches ran, want %d (stop after the closing one)", batches, tc.stopAfter)
			}
			if tc.want == nil && (res == nil || res.EpochsRun != 3) {
				t.Errorf("an open Stop ended training: %+v", res)
			}
		})
	}
}
