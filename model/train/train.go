package train

import (
	"convtag/model"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"

	"sync"
	"time"

	"convtag/model/internal/kernel"
	"convtag/model/metrics"
)

// Training defaults. Batch size 50, dropout 0.5 on the pooled features,
// max-norm 3 on the output weight rows, Adadelta with rho 0.95 and epsilon
// 1e-6, and 25 epochs are the settings of Kim (2014), "Convolutional Neural
// Networks for Sentence Classification", EMNLP, section 3.1 and his
// published training code. The patience is common practice, not from the
// paper (which trains a fixed number of epochs and keeps the best on dev).
const (
	DefaultEpochs   = 25
	DefaultPatience = 5
	DefaultBatch    = 50
	DefaultDropout  = 0.5
	DefaultMaxNorm  = 3
	AdadeltaRho     = 0.95
	AdadeltaEps     = 1e-6
	// AdamLearningRate, AdamBeta1, AdamBeta2 and AdamEps are the defaults of
	// Kingma and Ba (2015), "Adam: A Method for Stochastic Optimization",
	// which PyTorch's torch.optim.Adam also uses.
	AdamLearningRate = 1e-3
	AdamBeta1        = 0.9
	AdamBeta2        = 0.999
	AdamEps          = 1e-8
)

// Optimizer names.
const (
	OptAdadelta = "adadelta"
	OptAdam     = "adam"
)

// Example is one training or dev record: its embedding rows (as
// Vocab.Row gives them; an empty list stands for one padding token) and the
// index of its label in Model.Labels. For a multi-label model (Model.Multi)
// Tags lists the indices of all its labels instead (none, one or several,
// each once) and Label is ignored.
type Example struct {
	Rows  []int32 `json:"rows"`
	Label int     `json:"label"`
	Tags  []int   `json:"tags,omitempty"`
}

// TrainOptions control Train. The zero value of a field means its default.
type TrainOptions struct {
	Epochs   int     // most epochs; 0 means DefaultEpochs
	Patience int     // stop after this many epochs without a better dev accuracy; 0 means DefaultPatience, <0 never
	Batch    int     // mini-batch size; 0 means DefaultBatch
	Seed     uint64  // shuffling and dropout
	Jobs     int     // trainWorker goroutines; 0 means GOMAXPROCS
	Opt      string  // OptAdadelta (default) or OptAdam
	LR       float64 // learning rate; 0 means 1 for Adadelta, AdamLearningRate for Adam
	// Dropout is the probability of zeroing a pooled feature in training; 0
	// means DefaultDropout, a negative value none.
	Dropout float64
	// MaxNorm caps the L2 norm of each output weight row after every
	// update; 0 means DefaultMaxNorm, a negative value no cap.
	MaxNorm float64
	// ClassWeights weight each label's loss (len(Labels) values); nil means
	// all 1. BalancedWeights computes the usual "balanced" weights. For a
	// multi-label model they weight each label's positive term of the
	// binary cross-entropy (PyTorch's pos_weight); BalancedPositiveWeights
	// computes them.
	ClassWeights []float64
	// ThresholdGoal is how a multi-label model's per-label thresholds are
	// chosen on dev after training; the zero value maximises each label's F1.
	ThresholdGoal ThresholdGoal
	// Frozen marks embedding rows that are never updated (for example rows
	// taken from a word-vector file); nil means none. Row 0 (padding) is
	// never updated in any case.
	Frozen []bool

	// OnEpoch, if set, is called after every epoch with its figures.
	OnEpoch func(EpochStats)
	// OnBatch, if set, is called after every mini-batch with the number of
	// training examples done in this epoch and the total.
	OnBatch func(done, total int)
	// Stop, if not nil, ends training between two mini-batches once it is
	// closed (for example a context's Done channel): Train then returns
	// ErrStopped and leaves m's weights unspecified.
	Stop <-chan struct{}

	// kernels, if not nil, are the training kernels instead of
	// kernel.Active (tests compare the sets).
	kernels *kernel.Set
}

// EpochStats are one epoch's figures.
type EpochStats struct {
	Epoch      int     `json:"epoch"` // from 1
	Loss       float64 `json:"loss"`  // mean weighted training loss, with dropout
	TrainAcc   float64 `json:"train_accuracy"`
	DevAcc     float64 `json:"dev_accuracy"`
	DevMacroF1 float64 `json:"dev_macro_f1"`
	// DevMicroF1 is the multi-label micro-averaged F1 at 0.5 and DevLoss
	// the mean dev binary cross-entropy, on which a multi-label model's
	// best epoch is chosen (both 0 for single-label; DevAcc is then the
	// subset accuracy at 0.5).
	DevMicroF1 float64 `json:"dev_micro_f1,omitempty"`
	DevLoss    float64 `json:"dev_loss,omitempty"`
	Tokens     int     `json:"tokens"`  // training tokens (windows) seen
	Seconds    float64 `json:"seconds"` // this epoch's training time, without the dev evaluation
	Elapsed    float64 `json:"elapsed"` // since Train started, at the end of this epoch
}

// TrainResult sums up a run of Train.
type TrainResult struct {
	Curve      []EpochStats `json:"curve"`
	BestEpoch  int          `json:"best_epoch"`
	EpochsRun  int          `json:"epochs_run"`
	DevAcc     float64      `json:"dev_accuracy"`
	DevMacroF1 float64      `json:"dev_macro_f1"`
	DevMicroF1 float64      `json:"dev_micro_f1,omitempty"`
	Seconds    float64      `json:"seconds"`
	// Thresholds: for a multi-label model, how each label's threshold
	// (also set in Model.Thresholds) was chosen on dev.
	Thresholds []LabelThreshold `json:"label_thresholds,omitempty"`
}

// Errors of Train.
var (
	ErrNoExamples = errors.New("model: no training examples")
	ErrBadLabel   = errors.New("model: example label out of range")
	ErrBadRow     = errors.New("model: example row out of range")
	ErrStopped    = errors.New("model: training stopped")
)

// BalancedWeights returns per-label loss weights n / (C * n_c) for n
// examples over the C labels that occur, n_c of label c (the "balanced" heuristic of
// scikit-learn's compute_class_weight, common practice for skewed tags). A
// label without examples gets weight 0.
func BalancedWeights(train []Example, labels int) []float64 {
	counts := make([]int, labels)
	for _, e := range train {
		if e.Label >= 0 && e.Label < labels {
			counts[e.Label]++
		}
	}
	present := 0
	for _, n := range counts {
		if n > 0 {
			present++
		}
	}
	w := make([]float64, labels)
	for c, n := range counts {
		if n > 0 {
			w[c] = float64(len(train)) / float64(present*n)
		}
	}
	return w
}

func (o *TrainOptions) defaults() {
	if o.Epochs <= 0 {
		o.Epochs = DefaultEpochs
	}
	if o.Patience == 0 {
		o.Patience = DefaultPatience
	}
	if o.Batch <= 0 {
		o.Batch = DefaultBatch
	}
	if o.Jobs <= 0 {
		o.Jobs = runtime.GOMAXPROCS(0)
	}
	if o.Opt == "" {
		o.Opt = OptAdadelta
	}
	if o.LR <= 0 {
		o.LR = 1
		if o.Opt == OptAdam {
			o.LR = AdamLearningRate
		}
	}
	if o.Dropout == 0 {
		o.Dropout = DefaultDropout
	}
	if o.MaxNorm == 0 {
		o.MaxNorm = DefaultMaxNorm
	}
}

// Train fits m's weights to train by mini-batch back-propagation and keeps
// the weights of the epoch with the best accuracy on dev (with an empty dev
// set, the last epoch's). A multi-label m (Model.Multi) is trained with
// binary cross-entropy on one sigmoid per label, its best epoch is the one
// with the lowest dev binary cross-entropy, and Train then sets m.Thresholds from
// dev (see TrainOptions.ThresholdGoal). m must have its own writable weights (as New
// returns) and no folded table; Train writes them in place and is not safe
// to run concurrently with any other use of m. The same m, data, options
// and Jobs give bit-identical weights.
func Train(m *model.Model, train, dev []Example, opt TrainOptions) (*TrainResult, error) {
	opt.defaults()
	if len(train) == 0 {
		return nil, ErrNoExamples
	}
	if opt.Opt != OptAdadelta && opt.Opt != OptAdam {
		return nil, fmt.Errorf("model: unknown optimizer %q (want %s or %s)", opt.Opt, OptAdadelta, OptAdam)
	}
	if opt.ClassWeights != nil && len(opt.ClassWeights) != len(m.Labels) {
		return nil, fmt.Errorf("model: %d class weights for %d labels", len(opt.ClassWeights), len(m.Labels))
	}
	if err := checkTrainExamples(m, train); err != nil {
		return nil, err
	}
	if err := checkTrainExamples(m, dev); err != nil {
		return nil, err
	}
	m.Fold = nil
	t := newTrainer(m, opt)
	defer t.stop()
	res := &TrainResult{}
	start := time.Now()
	order := make([]int, len(train))
	bestAcc := math.Inf(-1)
	var best *netParams
	since := 0
	for epoch := 1; epoch <= opt.Epochs; epoch++ {
		es, ok := t.epoch(epoch, train, order)
		if !ok {
			return nil, ErrStopped
		}
		if len(dev) > 0 {
			if t.p.multi {
				es.DevAcc, es.DevMacroF1, es.DevMicroF1, es.DevLoss = t.evaluateMulti(dev)
			} else {
				es.DevAcc, es.DevMacroF1 = t.evaluate(dev)
			}
		}
		es.Elapsed = time.Since(start).Seconds()
		res.Curve = append(res.Curve, es)
		res.EpochsRun = epoch
		score := es.DevAcc
		if t.p.multi {
			// The F1 at 0.5 stays 0 while the network still says no to
			// every label, so it cannot tell early epochs apart; the loss
			// can (common practice for early stopping).
			score = -es.DevLoss
		}
		if len(dev) == 0 || score > bestAcc {
			bestAcc = score
			res.BestEpoch, res.DevAcc, res.DevMacroF1, res.DevMicroF1 = epoch, es.DevAcc, es.DevMacroF1, es.DevMicroF1
			best = t.p.snapshot(best)
			since = 0
		} else {
			since++
		}
		if opt.OnEpoch != nil {
			opt.OnEpoch(es)
		}
		if opt.Patience > 0 && since >= opt.Patience {
			break
		}
	}
	best.writeTo(m)
	if m.Multi {
		th, err := chooseThresholds(m, dev, opt.ThresholdGoal)
		if err != nil {
			return nil, err
		}
		res.Thresholds = th
	}
	res.Seconds = time.Since(start).Seconds()
	return res, nil
}

func checkTrainExamples(m *model.Model, ex []Example) error {
	rows := int32(m.Rows())
	for i, e := range ex {
		if m.Multi {
			if err := checkTags(e.Tags, len(m.Labels)); err != nil {
				return fmt.Errorf("model: example %d: %w", i, err)
			}
		} else if e.Label < 0 || e.Label >= len(m.Labels) {
			return fmt.Errorf("%w: example %d has label %d", ErrBadLabel, i, e.Label)
		}
		for _, r := range e.Rows {
			if r < 0 || r >= rows {
				return fmt.Errorf("%w: example %d has row %d", ErrBadRow, i, r)
			}
		}
	}
	return nil
}

// trainer holds the working parameters, the optimiser state and the
// workers' scratch for one run of Train.
type trainer struct {
	m    *model.Model
	opt  TrainOptions
	p    *netParams
	g    *netGrads // the batch's summed gradient
	ws   []*trainWorker
	st   optState
	cw   []float32
	step int

	jobs chan func()
	wg   sync.WaitGroup
}

func newTrainer(m *model.Model, opt TrainOptions) *trainer {
	t := &trainer{m: m, opt: opt, p: paramsFrom(m)}
	t.g = newGrads(t.p)
	t.cw = make([]float32, len(m.Labels))
	for c := range t.cw {
		t.cw[c] = 1
		if opt.ClassWeights != nil {
			t.cw[c] = float32(opt.ClassWeights[c])
		}
	}
	if opt.kernels != nil {
		t.p.kern = opt.kernels
	}
	t.st = newOptState(t.p, opt.Opt)
	for range opt.Jobs {
		t.ws = append(t.ws, newTrainWorker(t.p))
	}
	t.jobs = make(chan func())
	for range opt.Jobs {
		go func() {
			for f := range t.jobs {
				f()
				t.wg.Done()
			}
		}()
	}
	return t
}

func (t *trainer) stop() { close(t.jobs) }

// parallel runs f(k) for k < n on the trainWorker goroutines and waits.
func (t *trainer) parallel(n int, f func(k int)) {
	t.wg.Add(n)
	for k := range n {
		t.jobs <- func() { f(k) }
	}
	t.wg.Wait()
}

// epoch runs one pass over train in a seeded random order; ok is false
// when opt.Stop ended it early.
func (t *trainer) epoch(epoch int, train []Example, order []int) (_ EpochStats, ok bool) {
	epochOrder(order, t.opt.Seed, epoch)
	var loss, wsum float64
	correct, tokens := 0, 0
	start := time.Now()
	for b := 0; b < len(order); b += t.opt.Batch {
		select {
		case <-t.opt.Stop:
			return EpochStats{}, false
		default:
		}
		batch := order[b:min(b+t.opt.Batch, len(order))]
		var bw float64
		for _, i := range batch {
			if t.p.multi {
				// The mean over records and labels, as PyTorch's
				// BCEWithLogitsLoss(reduction="mean"); pos_weight does
				// not enter the denominator.
				bw += float64(len(t.cw))
			} else {
				bw += float64(t.cw[train[i].Label])
			}
		}
		if bw == 0 {
			continue
		}
		scale := float32(1 / bw)
		t.pack()
		nw := min(len(t.ws), len(batch))
		t.parallel(nw, func(k int) {
			w := t.ws[k]
			w.reset()
			lo, hi := k*len(batch)/nw, (k+1)*len(batch)/nw
			for _, i := range batch[lo:hi] {
				e := &train[i]
				seed := uint64(epoch)<<40 ^ uint64(i)
				if t.p.multi {
					w.exampleMulti(t.p, e, t.cw, scale, t.opt.Dropout, t.opt.Seed, seed)
				} else {
					w.example(t.p, e, t.cw[e.Label], scale, t.opt.Dropout, t.opt.Seed, seed)
				}
			}
		})
		t.reduce(nw)
		t.step++
		t.update()
		for _, w := range t.ws[:nw] {
			loss += w.loss
			correct += w.correct
			tokens += w.tokens
		}
		wsum += bw
		if t.opt.OnBatch != nil {
			t.opt.OnBatch(b+len(batch), len(order))
		}
	}
	return EpochStats{Epoch: epoch, Loss: loss / wsum, TrainAcc: float64(correct) / float64(len(train)), Tokens: tokens, Seconds: time.Since(start).Seconds()}, true
}

// pack refreshes the kernel layout of the weights on all workers.
func (t *trainer) pack() {
	t.parallel(len(t.ws), func(k int) { t.p.packPart(k, len(t.ws)) })
}

// epochOrder fills order with the training examples' order in the epoch
// (from 1) of a run with the seed.
func epochOrder(order []int, seed uint64, epoch int) {
	for i := range order {
		order[i] = i
	}
	rng := rand.New(rand.NewPCG(seed, uint64(epoch)))
	rng.Shuffle(len(order), func(i, j int) { order[i], order[j] = order[j], order[i] })
}

// reduce sums the first n workers' gradients into t.g, in trainWorker order for
// every element, so the result does not depend on scheduling.
func (t *trainer) reduce(n int) {
	g := t.g
	g.resetSparse()
	dense := g.trDense()
	// Dense tensors: split the element range across goroutines; each
	// element is still summed in trainWorker order.
	parts := len(t.ws)
	t.parallel(parts, func(k int) {
		for ti, dst := range dense {
			lo, hi := k*len(dst)/parts, (k+1)*len(dst)/parts
			copy(dst[lo:hi], t.ws[0].g.trDense()[ti][lo:hi])
			for _, w := range t.ws[1:n] {
				trAdd(t.p.kern, dst[lo:hi], w.g.trDense()[ti][lo:hi])
			}
		}
	})
	d := t.p.d
	for _, w := range t.ws[:n] {
		for si, r := range w.g.rows {
			src := w.g.embRow(si, d)
			trAdd(t.p.kern, g.touch(r, d), src)
		}
	}
}

// evaluate returns accuracy and macro-F1 on ex with the current weights,
// without dropout.
func (t *trainer) evaluate(ex []Example) (acc, macroF1 float64) {
	t.pack()
	pred := make([]int, len(ex))
	nw := min(len(t.ws), len(ex))
	t.parallel(nw, func(k int) {
		w := t.ws[k]
		for i := k * len(ex) / nw; i < (k+1)*len(ex)/nw; i++ {
			pred[i] = trArgmax(w.forward(t.p, ex[i].Rows, -1, 0, 0))
		}
	})
	gold := make([]int, len(ex))
	for i, e := range ex {
		gold[i] = e.Label
	}
	return metrics.Accuracy(gold, pred), metrics.MacroF1(metrics.PerLabel(metrics.Confusion(gold, pred, len(t.m.Labels)), nil))
}

func trArgmax(x []float32) int {
	best := 0
	for i, v := range x {
		if v > x[best] {
			best = i
		}
	}
	return best
}

// update applies the optimiser to the summed gradient, then the max-norm
// cap on the output rows.
func (t *trainer) update() {
	p, g, st := t.p, t.g, &t.st
	lr := float32(t.opt.LR)
	dense, gd := p.trDense(), g.trDense()
	t.parallel(len(t.ws), func(k int) {
		for i := range dense {
			lo, hi := k*len(dense[i])/len(t.ws), (k+1)*len(dense[i])/len(t.ws)
			st.step(t.opt.Opt, t.step, lr, dense[i][lo:hi], gd[i][lo:hi], st.a[i][lo:hi], st.b[i][lo:hi])
		}
	})
	d := p.d
	for si, r := range g.rows {
		if r == 0 || (t.opt.Frozen != nil && int(r) < len(t.opt.Frozen) && t.opt.Frozen[r]) {
			continue
		}
		o := int(r) * d
		st.embStep(t.opt.Opt, t.step, lr, p.emb[o:o+d], g.embRow(si, d), st.embA[o:o+d], st.embB[o:o+d])
	}
	if t.opt.MaxNorm > 0 {
		trMaxNorm(p.outW, p.outIn, float32(t.opt.MaxNorm))
	}
}

// trMaxNorm rescales every row of w (rows of length in) whose L2 norm exceeds
// s to norm s.
func trMaxNorm(w []float32, in int, s float32) {
	for o := 0; o < len(w); o += in {
		row := w[o : o+in]
		var ss float64
		for _, v := range row {
			ss += float64(v) * float64(v)
		}
		if n := math.Sqrt(ss); n > float64(s) {
			f := float32(float64(s) / n)
			for i := range row {
				row[i] *= f
			}
		}
	}
}

func trAdd(k *kernel.Set, dst, src []float32) {
	k.Axpy(1, src, dst)
}
