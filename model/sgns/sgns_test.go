package sgns

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"slices"
	"strings"
	"testing"
)

// TestStepByHand checks one update against the rule of Mikolov et al.
// 2013 (equation 4, ascended by stochastic gradient with rate alpha),
// worked out by hand for d = 2, one centre word c and one noise word n:
//
//	v   = (0.5, -0.5)          input vector of the context word
//	v'c = (1, 1)               output vector of the centre word
//	v'n = (2 ln 3, 0)          output vector of the noise word
//	alpha = 0.1
//
//	centre: v'c·v = 0.5 − 0.5 = 0, σ(0) = 1/2, g = (1 − 1/2)·0.1 = 0.05
//	noise:  v'n·v = ln 3, σ(ln 3) = 3/(3+1) = 3/4, g = (0 − 3/4)·0.1 = −0.075
//	v'c ← v'c + 0.05·v    = (1.025, 0.975)
//	v'n ← v'n − 0.075·v   = (2 ln 3 − 0.0375, 0.0375)
//	v   ← v + 0.05·v'c_old − 0.075·v'n_old
//	    = (0.5 + 0.05 − 0.15 ln 3, −0.5 + 0.05) = (0.55 − 0.15 ln 3, −0.45)
//
// (gradients at the old values: d/dv log σ(v'·v) = (1 − σ)v' and
// d/dv log σ(−v'·v) = −σ v', and the same with v and v' swapped.)
func TestStepByHand(t *testing.T) {
	ln3 := float32(math.Log(3))
	syn1 := []float32{1, 1, 2 * ln3, 0} // rows: centre 0, noise 1
	v := []float32{0.5, -0.5}
	step(syn1, 2, v, make([]float32, 2), 0, []int32{1}, 0.1)
	want := []float32{1.025, 0.975, 2*ln3 - 0.0375, 0.0375}
	wantV := []float32{0.55 - 0.15*ln3, -0.45}
	for i := range want {
		if math.Abs(float64(syn1[i]-want[i])) > 1e-6 {
			t.Errorf("output vectors %v, want %v", syn1, want)
			break
		}
	}
	for i := range wantV {
		if math.Abs(float64(v[i]-wantV[i])) > 1e-6 {
			t.Errorf("input vector %v, want %v", v, wantV)
			break
		}
	}
}

// needPython returns Debian's python3 if it can import mod; otherwise the
// test skips, or fails under CI=true.
func needPython(t *testing.T, mod, pkg string) string {
	t.Helper()
	const py = "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import "+mod).Run(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("reference %s missing (apt-get install %s): %v", mod, pkg, err)
		}
		t.Skipf("reference %s missing (apt-get install %s): %v", mod, pkg, err)
	}
	return py
}

// TestStepTorch checks step against PyTorch autograd (Debian's
// python3-torch): the loss −log σ(v'c·v) − Σ log σ(−v'n·v), one plain SGD
// step with learning rate alpha on v, v'c and every v'n. With distinct
// noise words (as here) the word2vec-style step equals that SGD step
// exactly; a noise word drawn twice is updated twice in sequence instead.
func TestStepTorch(t *testing.T) {
	py := needPython(t, "torch", "python3-torch")
	rng := rand.New(rand.NewPCG(5, 6))
	type tcase struct {
		V     []float32   `json:"v"`
		Rows  [][]float32 `json:"rows"` // centre, then noise words
		Alpha float32     `json:"alpha"`
	}
	var cases []tcase
	for _, d := range []int{1, 3, 7, 50} {
		for _, neg := range []int{0, 1, 5} {
			c := tcase{Alpha: 0.025 + 0.5*rng.Float32()}
			for range d {
				c.V = append(c.V, float32(rng.NormFloat64()))
			}
			for range neg + 1 {
				r := make([]float32, d)
				for i := range r {
					r[i] = float32(rng.NormFloat64()) / float32(math.Sqrt(float64(d)))
				}
				c.Rows = append(c.Rows, r)
			}
			cases = append(cases, c)
		}
	}
	in, _ := json.Marshal(cases)
	cmd := exec.Command(py, "-c", `
import json, sys, torch
out = []
for c in json.load(sys.stdin):
    v = torch.tensor(c["v"], dtype=torch.float64, requires_grad=True)
    rows = torch.tensor(c["rows"], dtype=torch.float64, requires_grad=True)
    s = rows @ v
    loss = -torch.nn.functional.logsigmoid(s[0]) - torch.nn.functional.logsigmoid(-s[1:]).sum()
    loss.backward()
    with torch.no_grad():
        out.append({"v": (v - c["alpha"] * v.grad).tolist(), "rows": (rows - c["alpha"] * rows.grad).tolist()})
json.dump(out, sys.stdout)
`)
	cmd.Stdin = strings.NewReader(string(in))
	cmd.Stderr = os.Stderr
	raw, err := cmd.Output()
	if err != nil {
		t.Fatalf("torch: %v", err)
	}
	var want []struct {
		V    []float64   `json:"v"`
		Rows [][]float64 `json:"rows"`
	}
	if err := json.Unmarshal(raw, &want); err != nil {
		t.Fatal(err)
	}
	close := func(a float32, b float64) bool { return math.Abs(float64(a)-b) <= 1e-5*(1+math.Abs(b)) }
	for ci, c := range cases {
		d := len(c.V)
		var syn1 []float32
		for _, r := range c.Rows {
			syn1 = append(syn1, r...)
		}
		negs := make([]int32, len(c.Rows)-1)
		for i := range negs {
			negs[i] = int32(i + 1)
		}
		v := slices.Clone(c.V)
		step(syn1, d, v, make([]float32, d), 0, negs, c.Alpha)
		for j := range d {
			if !close(v[j], want[ci].V[j]) {
				t.Fatalf("case %d (d %d, %d noise): v[%d] = %v, torch %v", ci, d, len(negs), j, v[j], want[ci].V[j])
			}
		}
		for r := range c.Rows {
			for j := range d {
				if !close(syn1[r*d+j], want[ci].Rows[r][j]) {
					t.Fatalf("case %d: row %d[%d] = %v, torch %v", ci, r, j, syn1[r*d+j], want[ci].Rows[r][j])
				}
			}
		}
	}
}

// The alias sampler draws each word with probability count^0.75 / Σ
// count^0.75 (Mikolov et al. 2013, section 2.2): 10^6 draws land within
// 5 standard deviations of the binomial expectation for every word.
func TestNoiseDistribution(t *testing.T) {
	counts := []int64{1000, 1, 7, 300, 300, 42, 5000, 2}
	a := newAlias(noiseWeights(counts))
	var sum float64
	for _, n := range counts {
		sum += math.Pow(float64(n), 0.75)
	}
	const draws = 1_000_000
	got := make([]int, len(counts))
	rng := rand.NewPCG(1, 1)
	for range draws {
		got[a.sample(rng.Uint64())]++
	}
	for i, n := range counts {
		p := math.Pow(float64(n), 0.75) / sum
		mean, sd := p*draws, math.Sqrt(draws*p*(1-p))
		if math.Abs(float64(got[i])-mean) > 5*sd {
			t.Errorf("word %d (count %d): %d draws, want %.0f ± %.0f", i, n, got[i], mean, 5*sd)
		}
	}
}

// Sub-sampling keeps a word with probability (sqrt(f/t) + 1)·t/f (the
// word2vec tool's variant): f = 4t gives (2 + 1)/4 = 0.75, f = 100t gives
// 11/100, and f ≤ 2.618t is always kept.
func TestKeepThresholds(t *testing.T) {
	const tt = 1e-3
	counts := []int64{4, 100, 2, 1} // of 1000 words: f = 4t, 100t, 2t, t
	keep := keepThresholds(counts, 1000, tt)
	want := []float64{0.75, 0.11, 1, 1}
	for i := range want {
		if got := float64(keep[i]) / (1 << 32); math.Abs(got-want[i]) > 1e-9 {
			t.Errorf("f = %d t: keep %v, want %v", counts[i], got, want[i])
		}
	}
	for _, k := range keepThresholds(counts, 1000, -1) {
		if k != 1<<32 {
			t.Errorf("sub-sampling off: keep %d, want 2^32", k)
		}
	}
}

func TestAlphaDecay(t *testing.T) {
	tr := &trainer{o: Options{Alpha: 0.025}, total: 999}
	for _, tc := range []struct {
		done int64
		want float64
	}{{0, 0.025}, {500, 0.0125}, {1000, 0.025 * 1e-4}, {5000, 0.025 * 1e-4}} {
		if got := tr.alpha(tc.done); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("alpha(%d) = %v, want %v", tc.done, got, tc.want)
		}
	}
}

// groupCorpus invents text in which the words of a group share their
// contexts: each record is about one group, its words drawn uniformly from
// that group and from filler words common to all records. So the words of
// one group have the same distribution of contexts, and words of different
// groups share only the fillers.
func groupCorpus(seed uint64, sentences int) (Texts, [][]string) {
	groups := [][]string{
		{"ferry", "launch", "skiff", "barge"},
		{"kelpholm", "saltery", "brinwick", "moss"},
		{"monday", "tuesday", "friday", "sunday"},
		{"ticket", "pass", "voucher", "token"},
		{"delayed", "cancelled", "late", "rerouted"},
		{"harbour", "quay", "pier", "jetty"},
	}
	fillers := []string{"the", "at", "is", "and", "on"}
	rng := rand.New(rand.NewPCG(seed, 99))
	var texts Texts
	for range sentences {
		g := groups[rng.IntN(len(groups))]
		var words []string
		for range 6 + rng.IntN(8) {
			if rng.IntN(3) == 0 {
				words = append(words, fillers[rng.IntN(len(fillers))])
			} else {
				words = append(words, g[rng.IntN(len(g))])
			}
		}
		texts = append(texts, strings.Join(words, " "))
	}
	return texts, groups
}

// Words that share their contexts by construction end up each other's
// nearest neighbours: for every word, the three most similar words by
// cosine are the other three of its group.
func TestNeighboursShareContexts(t *testing.T) {
	texts, groups := groupCorpus(7, 3000)
	for _, tc := range []struct {
		name string
		o    Options
	}{
		{"no sub-sampling", Options{Dim: 16, Sample: -1, Epochs: 3, Seed: 1, Jobs: 1}},
		{"sub-sampling 1e-2", Options{Dim: 16, Sample: 1e-2, Epochs: 5, Seed: 2, Jobs: 1}},
		{"two jobs", Options{Dim: 16, Sample: -1, Epochs: 3, Seed: 3, Jobs: 2}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if raceEnabled && tc.o.Jobs > 1 {
				t.Skip("lock-free updates race by design")
			}
			res, err := Train(context.Background(), texts, tc.o)
			if err != nil {
				t.Fatal(err)
			}
			s := res.Vectors
			if s.Len() != 29 {
				t.Fatalf("%d words, want 29", s.Len())
			}
			for _, g := range groups {
				for _, w := range g {
					near, err := s.Nearest(w, 3)
					if err != nil {
						t.Fatal(err)
					}
					var got []string
					for _, n := range near {
						got = append(got, n.Word)
					}
					mates := slices.DeleteFunc(slices.Clone(g), func(x string) bool { return x == w })
					slices.Sort(got)
					slices.Sort(mates)
					if !slices.Equal(got, mates) {
						t.Errorf("nearest to %q: %v (%v), want %v", w, got, near, mates)
					}
				}
			}
		})
	}
}

type countingCorpus struct {
	Texts
	scans int
}

func (c *countingCorpus) Scan(fn func([]byte) error) error {
	c.scans++
	return c.Texts.Scan(fn)
}

func TestDeterministicWithOneJob(t *testing.T) {
	texts, _ := groupCorpus(8, 500)
	run := func(seed uint64) *Result {
		c := &countingCorpus{Texts: texts}
		res, err := Train(context.Background(), c, Options{Dim: 8, Epochs: 2, Seed: seed, Jobs: 1, Sample: 1e-2, MinCount: 1})
		if err != nil {
			t.Fatal(err)
		}
		if c.scans != 3 {
			t.Errorf("corpus scanned %d times, want 3 (count + 2 epochs)", c.scans)
		}
		return res
	}
	a, b, c := run(1), run(1), run(2)
	if !slices.Equal(a.Vectors.Words, b.Vectors.Words) || !slices.Equal(a.Vectors.Vecs, b.Vectors.Vecs) {
		t.Error("same seed with one job gave different vectors")
	}
	if slices.Equal(a.Vectors.Vecs, c.Vectors.Vecs) {
		t.Error("different seeds gave identical vectors")
	}
	if !slices.Equal(a.Vectors.Words, c.Vectors.Words) {
		t.Error("the vocabulary depends on the seed")
	}
}

func TestVocabulary(t *testing.T) {
	texts := Texts{"The ferry, the FERRY!", "a quay", "", "the quay ferry"}
	res, err := Train(context.Background(), texts, Options{MinCount: 2, Dim: 4, Epochs: 1})
	if err != nil {
		t.Fatal(err)
	}
	// Tokens are the model tokenizer's (case-folded, punctuation dropped);
	// ties in count are in byte order.
	if want := []string{"ferry", "the", "quay"}; !slices.Equal(res.Vectors.Words, want) {
		t.Errorf("words %q, want %q", res.Vectors.Words, want)
	}
	if want := []int64{3, 3, 2}; !slices.Equal(res.Counts, want) {
		t.Errorf("counts %v, want %v", res.Counts, want)
	}
	if res.Records != 4 || res.Tokens != 9 || res.Words != 8 || res.Rare != 1 {
		t.Errorf("records %d tokens %d words %d rare %d; want 4 9 8 1", res.Records, res.Tokens, res.Words, res.Rare)
	}
}

type failingCorpus struct{ after int }

var errDisk = errors.New("disk on fire")

func (f failingCorpus) Scan(fn func([]byte) error) error {
	for i := range f.after {
		if err := fn([]byte(fmt.Sprint("word ", i%3))); err != nil {
			return err
		}
	}
	return errDisk
}

func TestErrors(t *testing.T) {
	ctx := context.Background()
	if _, err := Train(ctx, Texts{"one two", "three"}, Options{}); !errors.Is(err, ErrNoVocabulary) {
		t.Errorf("rare words only: %v, want ErrNoVocabulary", err)
	}
	if _, err := Train(ctx, failingCorpus{after: 100000}, Options{Jobs: 2}); !errors.Is(err, errDisk) {
		t.Errorf("failing corpus: %v, want %v", err, errDisk)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := Train(cctx, Texts{"a a a a a a"}, Options{MinCount: 1}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v, want context.Canceled", err)
	}
	for _, o := range []Options{{Dim: -1}, {Window: 2000}, {Negative: -3}, {Alpha: -1}, {Sample: 1}, {Epochs: -1}} {
		if _, err := Train(ctx, Texts{"a"}, o); err == nil || !strings.HasPrefix(err.Error(), "sgns: ") {
			t.Errorf("options %+v: %v, want an sgns: error", o, err)
		}
	}
}

func TestProgress(t *testing.T) {
	texts, _ := groupCorpus(9, 300)
	var got []Progress
	_, err := Train(context.Background(), texts, Options{Dim: 8, Epochs: 2, Jobs: 1, Progress: func(p Progress) { got = append(got, p) }})
	if err != nil {
		t.Fatal(err)
	}
	var done []Progress
	for _, p := range got {
		if p.Done {
			done = append(done, p)
		}
	}
	if len(done) != 2 || done[0].Phase != PhaseCount || done[1].Phase != PhaseTrain {
		t.Fatalf("final reports %+v, want one per phase", done)
	}
	if d := done[1]; d.Words != d.Total || d.Epoch != 2 || d.Alpha > 0.025*1e-3 {
		t.Errorf("end of training: %+v, want all words read in epoch 2 with the rate decayed", d)
	}
}

// benchCorpus invents Zipf-distributed text: 30,000 distinct words, records
// of 5 to 40 words.
func benchCorpus(words int) (Texts, int) {
	rng := rand.New(rand.NewPCG(11, 12))
	z := rand.NewZipf(rng, 1.1, 2, 30000-1)
	var texts Texts
	n := 0
	var sb strings.Builder
	for n < words {
		sb.Reset()
		k := 5 + rng.IntN(36)
		for i := range k {
			if i > 0 {
				sb.WriteByte(' ')
			}
			fmt.Fprintf(&sb, "w%d", z.Uint64())
		}
		texts = append(texts, sb.String())
		n += k
	}
	return texts, n
}

// BenchmarkTrain measures training words per second (one epoch, after the
// counting pass, which is timed too) at d = 100 and 300 on 1 and 2 jobs;
// the 1-job run is the baseline for the 2-job speed-up. words/cpu-s divides
// by the process's CPU time (counting pass included) instead of the
// training wall time, which says more on a shared, loaded machine.
func BenchmarkTrain(b *testing.B) {
	texts, n := benchCorpus(200_000)
	var bytes int64
	for _, s := range texts {
		bytes += int64(len(s)) + 1
	}
	for _, d := range []int{100, 300} {
		for _, jobs := range []int{1, 2} {
			b.Run(fmt.Sprintf("d=%d/j=%d", d, jobs), func(b *testing.B) {
				b.SetBytes(bytes)
				b.ReportAllocs()
				var words int64
				var secs float64
				cpu0 := cpuSeconds()
				for b.Loop() {
					res, err := Train(context.Background(), texts, Options{Dim: d, Epochs: 1, Jobs: jobs, MinCount: 1})
					if err != nil {
						b.Fatal(err)
					}
					words += res.Words
					secs += res.TrainTime.Seconds()
				}
				b.ReportMetric(float64(words)/secs, "words/s")
				b.ReportMetric(float64(words)/(cpuSeconds()-cpu0), "words/cpu-s")
				_ = n
			})
		}
	}
}
