package model

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"

	"convtag/model/internal/kernel"
	"convtag/model/token"
)

// fwConfigs are the shapes the forward tests run on: filter counts below,
// at and off the vector widths (8 and 16), with and without a hidden
// layer, one width or several.
var fwConfigs = []struct {
	name string
	cfg  Config
}{
	{"d16-345x17", Config{Dim: 16, Widths: []int{3, 4, 5}, Filters: 17, Buckets: 40}},
	{"d24-25x40-h12", Config{Dim: 24, Widths: []int{2, 5}, Filters: 40, Hidden: 12, Buckets: 30}},
	{"d8-1x5", Config{Dim: 8, Widths: []int{1}, Filters: 5, Buckets: 7}},
	{"d64-345x100", Config{Dim: 64, Widths: []int{3, 4, 5}, Filters: 100, Buckets: 100}},
	{"d30-3x64-h7", Config{Dim: 30, Widths: []int{3}, Filters: 64, Hidden: 7, Buckets: 20}},
}

// fwModel builds a random model with nw words and three labels.
func fwModel(t testing.TB, cfg Config, nw int, seed uint64) *Model {
	t.Helper()
	words := make([]string, nw)
	for i := range words {
		words[i] = fmt.Sprintf("w%d", i)
	}
	m, err := New(cfg, token.Settings{}, []string{"harbour", "timetable", "luggage"}, words, seed)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// fwInputs returns count random row lists with lengths cycling through
// 1..60, every row valid for m (padding, words and buckets).
func fwInputs(m *Model, count int, seed uint64) [][]int32 {
	rng := rand.New(rand.NewPCG(seed, 99))
	in := make([][]int32, count)
	for i := range in {
		rows := make([]int32, 1+i%60)
		for j := range rows {
			rows[j] = int32(rng.IntN(m.Rows()))
		}
		in[i] = rows
	}
	return in
}

// fwFolded returns a copy of m sharing its weights, with fold tables.
func fwFolded(m *Model, half bool) *Model {
	c := *m
	FoldModel(&c, half)
	return &c
}

// fwRun predicts rows with a fresh predictor and copies the results.
type fwResult struct {
	probs, logits, feat []float32
	win                 []int32
}

func fwPredict(p *Predictor, rows []int32) fwResult {
	probs := p.PredictRows(rows)
	return fwResult{
		probs:  append([]float32(nil), probs...),
		logits: append([]float32(nil), p.Logits()...),
		feat:   append([]float32(nil), p.Features()...),
		win:    append([]int32(nil), p.Winners()...),
	}
}

func fwMaxDiff(a, b []float32) float64 {
	d := 0.0
	for i := range a {
		d = max(d, math.Abs(float64(a[i])-float64(b[i])))
	}
	return d
}

// TestFoldedMatchesDirect: the folded path (F32 table) gives the direct
// path's probabilities within 1e-5, with every kernel implementation.
func TestFoldedMatchesDirect(t *testing.T) {
	for _, tc := range fwConfigs {
		m := fwModel(t, tc.cfg, 150, 7)
		fm := fwFolded(m, false)
		inputs := append(fwInputs(m, 300, 11), nil)
		for _, k := range kernel.All {
			t.Run(tc.name+"/"+k.Name, func(t *testing.T) {
				inputs := inputs
				if k == kernel.Generic && tc.cfg.Dim*tc.cfg.Filters > 2000 {
					inputs = inputs[:60] // the plain-Go direct path is slow
				}
				pd, pf := m.NewPredictor(), fm.NewPredictor()
				pd.k, pf.k = k, k
				worst := 0.0
				for _, rows := range inputs {
					d, f := fwPredict(pd, rows), fwPredict(pf, rows)
					if e := fwMaxDiff(d.probs, f.probs); e > 1e-5 {
						t.Fatalf("n=%d: probabilities differ by %g: direct %v folded %v", len(rows), e, d.probs, f.probs)
					}
					if e := fwMaxDiff(d.feat, f.feat); e > 1e-5 {
						t.Fatalf("n=%d: features differ by %g", len(rows), e)
					}
					worst = max(worst, fwMaxDiff(d.probs, f.probs))
					fwCheckWinners(t, d, f)
				}
				t.Logf("largest probability difference %.3g", worst)
			})
		}
	}
}

// fwCheckWinners: both paths agree on which features are zero (winner -1)
// unless the feature is within rounding of zero, and where the winners
// differ the two positions must be a near-tie; that is checked by the
// gonum test, which has the pre-activations. Here: same -1 pattern.
func fwCheckWinners(t *testing.T, d, f fwResult) {
	t.Helper()
	for i := range d.win {
		if (d.win[i] < 0) != (f.win[i] < 0) && max(d.feat[i], f.feat[i]) > 1e-5 {
			t.Fatalf("feature %d: direct winner %d (%g), folded %d (%g)", i, d.win[i], d.feat[i], f.win[i], f.feat[i])
		}
	}
}

// TestFoldedHalf: with an F16 table, the folded path gives exactly the
// results of an F32 table holding the same (widened) values, and stays
// within an error bound derived from the rounding of the table against the
// direct path.
//
// The bound: rounding to binary16 moves an entry T by at most
// |T|·2^-11 (half an ulp, 10 fraction bits) or 2^-25 for subnormals, so a
// pre-activation moves by at most the sum e_p of its taps' bounds, a
// pooled feature (max is 1-Lipschitz) by at most max_p e_p, a logit by the
// sum of |weight|·(feature bound) through each layer (ReLU is 1-Lipschitz),
// and a softmax probability by at most half the largest logit change
// (|dp_i/dz_j| summed over j is 2·p_i·(1-p_i) <= 1/2). A small float32
// allowance (1e-5) covers the direct path's own rounding.
func TestFoldedHalf(t *testing.T) {
	for _, tc := range fwConfigs {
		m := fwModel(t, tc.cfg, 150, 8)
		hm := fwFolded(m, true)
		wm := *m // F32 tables holding the widened halves
		wm.Fold = make([]FoldTable, len(hm.Fold))
		for i, ft := range hm.Fold {
			w := make([]float32, len(ft.F16))
			for j, h := range ft.F16 {
				w[j] = kernel.F16ToF32(h)
			}
			wm.Fold[i] = FoldTable{Width: ft.Width, F32: w}
		}
		exact := fwFolded(m, false)
		inputs := fwInputs(m, 300, 12)
		for _, k := range kernel.All {
			t.Run(tc.name+"/"+k.Name, func(t *testing.T) {
				inputs := inputs
				if k == kernel.Generic && tc.cfg.Dim*tc.cfg.Filters > 2000 {
					inputs = inputs[:60] // the plain-Go direct path is slow
				}
				ph, pw, pd := hm.NewPredictor(), wm.NewPredictor(), m.NewPredictor()
				ph.k, pw.k, pd.k = k, k, k
				worstP, worstRatio := 0.0, 0.0
				for _, rows := range inputs {
					h, w, d := fwPredict(ph, rows), fwPredict(pw, rows), fwPredict(pd, rows)
					for i := range h.feat {
						if math.Float32bits(h.feat[i]) != math.Float32bits(w.feat[i]) || h.win[i] != w.win[i] {
							t.Fatalf("n=%d feature %d: F16 table %v@%d, widened F32 table %v@%d", len(rows), i, h.feat[i], h.win[i], w.feat[i], w.win[i])
						}
					}
					zb := fwHalfLogitBound(exact, rows)
					if e := fwMaxDiff(h.logits, d.logits); e > zb+1e-5 {
						t.Fatalf("n=%d: F16 logits differ from direct by %g, bound %g", len(rows), e, zb)
					}
					e := fwMaxDiff(h.probs, d.probs)
					if e > zb/2+1e-5 {
						t.Fatalf("n=%d: F16 probabilities differ from direct by %g, bound %g", len(rows), e, zb/2)
					}
					worstP = max(worstP, e)
					if zb > 0 {
						worstRatio = max(worstRatio, fwMaxDiff(h.logits, d.logits)/zb)
					}
				}
				t.Logf("largest probability difference %.3g; largest logit difference / bound %.3g", worstP, worstRatio)
			})
		}
	}
}

// fwHalfLogitBound is the largest logit change rounding m's (F32) fold
// tables to binary16 can cause for rows; see TestFoldedHalf.
func fwHalfLogitBound(m *Model, rows []int32) float64 {
	f := m.Config.Filters
	n := len(rows)
	fb := make([]float64, m.Config.Features())
	for i, ft := range m.Fold {
		w := ft.Width
		for c := range f {
			for p := range n {
				e := 0.0
				for k := 0; k < w && p+k < n; k++ {
					v := math.Abs(float64(ft.F32[(int(rows[p+k])*w+k)*f+c]))
					e += max(v*math.Ldexp(1, -11), math.Ldexp(1, -25))
				}
				fb[i*f+c] = max(fb[i*f+c], e)
			}
		}
	}
	through := func(l *Dense, in []float64) []float64 {
		out := make([]float64, l.Out)
		for o := range out {
			for j, b := range in {
				out[o] += math.Abs(float64(l.W[o*l.In+j])) * b
			}
		}
		return out
	}
	if m.Hidden != nil {
		fb = through(m.Hidden, fb)
	}
	zb := 0.0
	for _, b := range through(&m.Out, fb) {
		zb = max(zb, b)
	}
	return zb
}

// TestDirectMatchesGonum checks the direct path against the convolution
// written as im2col plus a matrix product, computed by gonum's BLAS
// (blas32.Gemm, then blas32.Gemv for the dense layers): for each width,
// the n×(d·w) matrix of windows, each laid out like one filter of torch's
// Conv1d weight [F][d][w], times the transposed F×(d·w) weight matrix gives
// the n×F pre-activations.
func TestDirectMatchesGonum(t *testing.T) {
	for _, tc := range fwConfigs {
		m := fwModel(t, tc.cfg, 150, 9)
		for _, k := range kernel.All {
			t.Run(tc.name+"/"+k.Name, func(t *testing.T) {
				p := m.NewPredictor()
				p.k = k
				for _, rows := range fwInputs(m, 120, 13) {
					got := fwPredict(p, rows)
					pre, logits := fwGonumForward(m, rows)
					f := m.Config.Filters
					for i := range m.Convs {
						for c := range f {
							best, at := float32(0), -1
							for q, v := range pre[i] {
								if v[c] > best {
									best, at = v[c], q
								}
							}
							j := i*f + c
							if math.Abs(float64(got.feat[j]-best)) > 1e-5 {
								t.Fatalf("n=%d width %d filter %d: feature %v, gonum %v", len(rows), i, c, got.feat[j], best)
							}
							// The winner is the first maximum: ties within
							// rounding may go either way, but the winning
							// window must reach the maximum.
							switch w := got.win[j]; {
							case w < 0 && best > 1e-5, w >= 0 && at < 0 && got.feat[j] > 1e-5:
								t.Fatalf("n=%d width %d filter %d: winner %d, gonum %d (max %v)", len(rows), i, c, w, at, best)
							case w >= 0 && math.Abs(float64(pre[i][w][c]-best)) > 1e-5:
								t.Fatalf("n=%d width %d filter %d: winner %d has %v, max %v at %d", len(rows), i, c, w, pre[i][w][c], best, at)
							}
						}
					}
					if e := fwMaxDiff(got.logits, logits); e > 1e-5 {
						t.Fatalf("n=%d: logits differ by %g: %v, gonum %v", len(rows), e, got.logits, logits)
					}
				}
			})
		}
	}
}

// fwGonumForward returns per width the pre-activations [n][F] and the
// logits, computed with gonum.
func fwGonumForward(m *Model, rows []int32) ([][][]float32, []float32) {
	d, f, n := m.Config.Dim, m.Config.Filters, len(rows)
	feat := make([]float32, m.Config.Features())
	var pres [][][]float32
	for i, cv := range m.Convs {
		w := cv.Width
		col := blas32.General{Rows: n, Cols: d * w, Stride: d * w, Data: make([]float32, n*d*w)}
		for p := range n {
			for j := range d {
				for k := 0; k < w && p+k < n; k++ {
					col.Data[p*d*w+j*w+k] = m.Emb[int(rows[p+k])*d+j]
				}
			}
		}
		wm := blas32.General{Rows: f, Cols: d * w, Stride: d * w, Data: cv.W}
		out := blas32.General{Rows: n, Cols: f, Stride: f, Data: make([]float32, n*f)}
		for p := range n {
			copy(out.Data[p*f:(p+1)*f], cv.B)
		}
		blas32.Gemm(blas.NoTrans, blas.Trans, 1, col, wm, 1, out)
		pre := make([][]float32, n)
		for p := range n {
			pre[p] = out.Data[p*f : (p+1)*f]
			for c, v := range pre[p] {
				feat[i*f+c] = max(feat[i*f+c], v)
			}
		}
		pres = append(pres, pre)
	}
	dense := func(l *Dense, in []float32, relu bool) []float32 {
		y := blas32.Vector{N: l.Out, Inc: 1, Data: append([]float32(nil), l.B...)}
		a := blas32.General{Rows: l.Out, Cols: l.In, Stride: l.In, Data: l.W}
		blas32.Gemv(blas.NoTrans, 1, a, blas32.Vector{N: l.In, Inc: 1, Data: in}, 1, y)
		if relu {
			for i, v := range y.Data {
				y.Data[i] = max(0, v)
			}
		}
		return y.Data
	}
	in := feat
	if m.Hidden != nil {
		in = dense(m.Hidden, in, true)
	}
	return pres, dense(&m.Out, in, false)
}

// TestWinnersDefinition: a feature is 0 exactly when its winner is -1, and
// otherwise equals the pre-activation of the winning window recomputed in
// float64 from the definition, which no earlier window exceeds.
func TestWinnersDefinition(t *testing.T) {
	m := fwModel(t, fwConfigs[0].cfg, 100, 10)
	for _, mm := range []*Model{m, fwFolded(m, false)} {
		p := mm.NewPredictor()
		sawNone := false
		for _, rows := range fwInputs(m, 200, 14) {
			r := fwPredict(p, rows)
			f := m.Config.Filters
			for i, cv := range m.Convs {
				for c := range f {
					j := i*f + c
					w := r.win[j]
					if w < 0 {
						sawNone = true
						if r.feat[j] != 0 {
							t.Fatalf("feature %d is %v with winner -1", j, r.feat[j])
						}
						continue
					}
					if r.feat[j] <= 0 {
						t.Fatalf("feature %d is %v with winner %d", j, r.feat[j], w)
					}
					pre := fwPre64(m, cv, c, rows, int(w))
					if math.Abs(pre-float64(r.feat[j])) > 1e-5 {
						t.Fatalf("feature %d = %v, window %d gives %v", j, r.feat[j], w, pre)
					}
					for q := range int(w) {
						if e := fwPre64(m, cv, c, rows, q); e > pre+1e-5 {
							t.Fatalf("feature %d: window %d (%v) beats the winner %d (%v)", j, q, e, w, pre)
						}
					}
				}
			}
		}
		if !sawNone {
			t.Fatal("no feature was zero everywhere; the -1 case went untested")
		}
	}
}

// fwPre64 is pre[p][c] of one convolution, from the definition in float64.
func fwPre64(m *Model, cv Conv, c int, rows []int32, p int) float64 {
	d, w := m.Config.Dim, cv.Width
	s := float64(cv.B[c])
	for k := 0; k < w && p+k < len(rows); k++ {
		for j := range d {
			s += float64(cv.W[(c*d+j)*w+k]) * float64(m.Emb[int(rows[p+k])*d+j])
		}
	}
	return s
}

func TestEmptyIsOnePaddingToken(t *testing.T) {
	m := fwModel(t, fwConfigs[1].cfg, 50, 3)
	for _, mm := range []*Model{m, fwFolded(m, false), fwFolded(m, true)} {
		p := mm.NewPredictor()
		want := fwPredict(p, []int32{0})
		for _, got := range []fwResult{fwPredict(p, nil), fwPredictText(p, ""), fwPredictText(p, " ,;  ")} {
			if fwMaxDiff(got.probs, want.probs) != 0 || fwMaxDiff(got.feat, want.feat) != 0 {
				t.Fatalf("empty input gives %v, one padding token %v", got.probs, want.probs)
			}
		}
	}
}

func fwPredictText(p *Predictor, s string) fwResult {
	probs := p.Predict([]byte(s))
	return fwResult{probs: append([]float32(nil), probs...), feat: append([]float32(nil), p.Features()...)}
}

// TestPredictTokenizes: Predict equals PredictRows on the rows the
// tokenizer and vocabulary give, and probabilities sum to 1.
func TestPredictTokenizes(t *testing.T) {
	m := fwModel(t, fwConfigs[0].cfg, 50, 4)
	p := m.NewPredictor()
	for _, s := range []string{"w1 w2 w3", "w7 unknownword w49, w0!", "ferry to Kelloway at 9"} {
		var ts token.Tokens
		m.Tokenizer().Tokenize(&ts, []byte(s))
		rows := make([]int32, ts.Len())
		for i := range rows {
			rows[i] = m.Vocab.Row(ts.At(i))
		}
		want := fwPredict(p, rows)
		got := fwPredictText(p, s)
		if fwMaxDiff(got.probs, want.probs) != 0 {
			t.Fatalf("%q: Predict %v, PredictRows %v", s, got.probs, want.probs)
		}
		sum := 0.0
		for _, v := range got.probs {
			sum += float64(v)
		}
		if math.Abs(sum-1) > 1e-6 {
			t.Fatalf("%q: probabilities sum to %v", s, sum)
		}
	}
}

func TestSetDirect(t *testing.T) {
	m := fwFolded(fwModel(t, fwConfigs[0].cfg, 50, 5), false)
	p := m.NewPredictor()
	rows := []int32{3, 9, 27, 4}
	folded := fwPredict(p, rows)
	p.SetDirect(true)
	direct := fwPredict(p, rows)
	if p.wt == nil {
		t.Fatal("SetDirect(true) did not use the direct path")
	}
	if fwMaxDiff(folded.probs, direct.probs) > 1e-5 {
		t.Fatalf("direct %v, folded %v", direct.probs, folded.probs)
	}
}

func TestPredictRowsPanicsOnBadRow(t *testing.T) {
	m := fwModel(t, fwConfigs[0].cfg, 50, 6)
	for _, bad := range []int32{-1, int32(m.Rows())} {
		func() {
			defer func() {
				r := recover()
				if r == nil || !strings.Contains(fmt.Sprint(r), "out of range") {
					t.Fatalf("row %d: recovered %v", bad, r)
				}
			}()
			m.NewPredictor().PredictRows([]int32{1, bad})
		}()
	}
}

// TestZeroAllocs: after warm-up, a prediction allocates nothing, on every
// path and kernel, with and without a hidden layer.
func TestZeroAllocs(t *testing.T) {
	text := []byte("the w3 ferry leaves w17 at 9, w40 w41 w42 late again today")
	for _, ci := range []int{0, 1} { // no hidden, hidden 12
		m := fwModel(t, fwConfigs[ci].cfg, 50, 7)
		models := map[string]*Model{"direct": m, "f32": fwFolded(m, false), "f16": fwFolded(m, true)}
		rows := fwInputs(m, 60, 15)
		for name, mm := range models {
			for _, k := range kernel.All {
				p := mm.NewPredictor()
				p.k = k
				for _, r := range rows {
					p.PredictRows(r)
				}
				i := 0
				if a := testing.AllocsPerRun(100, func() { p.PredictRows(rows[i%len(rows)]); i++ }); a != 0 {
					t.Errorf("%s/%s/%s: PredictRows allocates %v times", fwConfigs[ci].name, name, k.Name, a)
				}
				if a := testing.AllocsPerRun(100, func() { p.Predict(text) }); a != 0 {
					t.Errorf("%s/%s/%s: Predict allocates %v times", fwConfigs[ci].name, name, k.Name, a)
				}
			}
		}
	}
}

// TestConcurrentPredictors: one shared model, a predictor per goroutine,
// the same results as one predictor alone (run with -race to check that
// nothing shared is written).
func TestConcurrentPredictors(t *testing.T) {
	m := fwFolded(fwModel(t, fwConfigs[1].cfg, 100, 8), true)
	inputs := fwInputs(m, 200, 16)
	exact := fwFolded(m, false)
	want := make([][]float32, len(inputs))
	p := m.NewPredictor()
	for i, r := range inputs {
		want[i] = append([]float32(nil), p.PredictRows(r)...)
	}
	var wg sync.WaitGroup
	errs := make(chan string, 8)
	for g := range 8 {
		wg.Go(func() {
			p := m.NewPredictor()
			p.SetDirect(g%2 == 1)
			for i, r := range inputs {
				got := p.PredictRows(r)
				tol := 0.0
				if g%2 == 1 {
					tol = fwHalfLogitBound(exact, r)/2 + 1e-5
				}
				if fwMaxDiff(got, want[i]) > tol {
					errs <- fmt.Sprintf("goroutine %d input %d: %v, want %v", g, i, got, want[i])
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for e := range errs {
		t.Fatal(e)
	}
}

// TestAgainstTorch builds the same network with torch.nn (Embedding,
// Conv1d on F.pad(x, (0, w-1)), ReLU, max over time, cat, optional
// Linear+ReLU, Linear) from our saved model file, read by
// testdata/torch_forward.py with numpy, and compares the logits of 250
// random inputs of 1 to 60 rows within 1e-4, for the direct and the folded
// (F32) path. The script also folds the tables itself and compares them
// with the file's. Reference: PyTorch from Debian's python3-torch. One
// script run covers both models (importing torch takes a few seconds).
func TestAgainstTorch(t *testing.T) {
	fwRequireTorch(t)
	cases := []struct {
		name string
		cfg  Config
	}{
		{"d32-345x20", Config{Dim: 32, Widths: []int{3, 4, 5}, Filters: 20, Buckets: 50}},
		{"d20-23x33-h16", Config{Dim: 20, Widths: []int{2, 3}, Filters: 33, Hidden: 16, Buckets: 25}},
	}
	dir := t.TempDir()
	type job struct {
		Model  string    `json:"model"`
		Inputs [][]int32 `json:"inputs"`
	}
	var jobs []job
	var models []*Model
	for i, tc := range cases {
		m := fwFolded(fwModel(t, tc.cfg, 300, 21), false)
		path := filepath.Join(dir, fmt.Sprintf("model%d.safetensors", i))
		if err := m.Save(path, SaveOptions{}); err != nil {
			t.Fatal(err)
		}
		models = append(models, m)
		jobs = append(jobs, job{path, fwInputs(m, 250, 22)})
	}
	in, err := json.Marshal(jobs)
	if err != nil {
		t.Fatal(err)
	}
	inPath := filepath.Join(dir, "in.json")
	if err := os.WriteFile(inPath, in, 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("/usr/bin/python3", filepath.Join("..", "testdata", "torch_forward.py"), inPath)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("torch_forward.py: %v: %s", err, stderr.String())
	}
	var refs []struct {
		Logits      [][]float32 `json:"logits"`
		FoldMaxDiff []float64   `json:"fold_max_abs_diff"`
	}
	if err := json.Unmarshal(out, &refs); err != nil || len(refs) != len(cases) {
		t.Fatalf("torch_forward.py output: %d results, %v", len(refs), err)
	}
	for ci, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m, ref, inputs := models[ci], refs[ci], jobs[ci].Inputs
			if len(ref.Logits) != len(inputs) || len(ref.FoldMaxDiff) != len(m.Convs) {
				t.Fatalf("torch_forward.py gave %d logit rows and %d fold checks", len(ref.Logits), len(ref.FoldMaxDiff))
			}
			for i, e := range ref.FoldMaxDiff {
				if e > 1e-5 {
					t.Errorf("fold.%d differs from torch's folding by %g", i, e)
				}
			}
			for _, direct := range []bool{true, false} {
				p := m.NewPredictor()
				p.SetDirect(direct)
				worst := 0.0
				for i, rows := range inputs {
					p.PredictRows(rows)
					e := fwMaxDiff(p.Logits(), ref.Logits[i])
					if e > 1e-4 {
						t.Fatalf("direct=%v input %d (n=%d): logits %v, torch %v", direct, i, len(rows), p.Logits(), ref.Logits[i])
					}
					worst = max(worst, e)
				}
				t.Logf("direct=%v: largest logit difference from torch %.3g", direct, worst)
			}
		})
	}
}

// fwRequireTorch skips without PyTorch, except under CI=true, where the
// missing reference is a failure.
func fwRequireTorch(t *testing.T) {
	t.Helper()
	err := exec.Command("/usr/bin/python3", "-c", "import torch, numpy").Run()
	if err == nil {
		return
	}
	if os.Getenv("CI") == "true" {
		t.Fatalf("PyTorch (python3-torch) is required under CI=true: %v", err)
	}
	t.Skipf("PyTorch not available: %v", err)
}
