package train

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"maps"
	"runtime"
	"slices"
	"strconv"
	"strings"

	"convtag/model"
	"convtag/model/linear"
	"convtag/model/metrics"
	"convtag/model/nb"
	"convtag/model/token"
	"convtag/model/vectors"
)

// Defaults of the recipe beyond Train's own.
const (
	DefaultDevFraction  = 0.1
	DefaultSeed         = 1
	DefaultMinSeen      = 1 // every word seen in training gets its own row
	DefaultClassWeights = ClassWeightsNone
)

// Class-weight schemes of a Recipe.
const (
	ClassWeightsNone     = "none"
	ClassWeightsBalanced = "balanced" // BalancedWeights
)

// BaselineKind describes the baseline Fit trains beside the network.
const BaselineKind = "multinomial naive Bayes, lowercase unigrams+bigrams, Laplace smoothing"

// Recipe is the whole way from labelled texts to a model file's contents:
// tokenizing, the dev split, the vocabulary, word vectors, the network's
// initialisation, training, the naive-Bayes baseline, the folded table and
// the training summary. Start from Defaults; a zero field is taken as
// given (Patience 0 never stops early, Hidden 0 is no hidden layer), except
// Jobs, where 0 means GOMAXPROCS.
//
// The same Recipe, records and Jobs give a byte-identical model.
type Recipe struct {
	// Network shape (model.Config).
	Dim, Filters, Hidden, Buckets int
	Widths                        []int

	Epochs, Patience, Batch, Jobs int
	Seed                          uint64 // initialisation, the dev split, shuffling and dropout
	Optimizer                     string // OptAdadelta or OptAdam
	LR                            float64
	ClassWeights                  string // ClassWeightsNone (or "") or ClassWeightsBalanced

	MinSeen, MaxWords int     // BuildWords' minCount and maxWords
	DevFraction       float64 // share of each label held out as dev when Fit is given no dev records

	// Labels, if not nil, are the model's labels in this order (training
	// records of other labels are an error); nil means the sorted labels of
	// the training records.
	Labels []string

	// Vectors, if not nil, give the first rows of the words they hold; Dim
	// must be their size. VectorsName names them in messages and in the
	// summary. Freeze keeps those rows fixed.
	Vectors     *vectors.Set
	VectorsName string
	Freeze      bool

	// NoFold leaves out the folded table; FoldHalf stores it in half
	// precision.
	NoFold, FoldHalf bool

	// MixBaseline fits the linear baseline (logistic regression on tf-idf
	// unigrams and bigrams, C chosen on dev), stores it, and makes the
	// model score with the mixture of network and baseline whose weight
	// does best on the dev records (ChooseMix), when that beats the network
	// alone there.
	MixBaseline bool

	// The model card's words, stored in the summary.
	Description, IntendedUse, NotFor string

	// ThresholdGoal chooses a multi-label model's per-label thresholds
	// (FitMulti); the zero value maximises each label's dev F1.
	ThresholdGoal ThresholdGoal
}

// Defaults returns the recipe train runs without flags.
func Defaults() Recipe {
	return Recipe{
		Dim: model.DefaultDim, Widths: slices.Clone(model.DefaultWidths), Filters: model.DefaultFilters, Buckets: model.DefaultBuckets,
		Epochs: DefaultEpochs, Patience: DefaultPatience, Batch: DefaultBatch, Seed: DefaultSeed,
		Optimizer: OptAdadelta, ClassWeights: DefaultClassWeights,
		MinSeen: DefaultMinSeen, DevFraction: DefaultDevFraction,
	}
}

// Config is the network shape of r.
func (r Recipe) Config() model.Config {
	return model.Config{Dim: r.Dim, Widths: r.Widths, Filters: r.Filters, Hidden: r.Hidden, Buckets: r.Buckets}
}

// Record is one labelled text. Fit reads Label; FitMulti reads Tags (none,
// one or several labels).
type Record struct {
	Text, Label string
	Tags        []string
}

// Progress receives what Fit has to say while it runs; a nil field is
// skipped. Messages are one line each, without a trailing newline.
type Progress struct {
	Warn  func(msg string)      // a problem with the data that training goes on with
	Info  func(msg string)      // what is being done (coverage of the vectors, the records trained on)
	Batch func(done, total int) // TrainOptions.OnBatch
	Epoch func(e EpochStats)    // TrainOptions.OnEpoch
}

func (p Progress) warn(format string, v ...any) {
	if p.Warn != nil {
		p.Warn(fmt.Sprintf(format, v...))
	}
}

func (p Progress) info(format string, v ...any) {
	if p.Info != nil {
		p.Info(fmt.Sprintf(format, v...))
	}
}

// FewLabelsError is Fit's error when the training records have fewer than
// two labels.
type FewLabelsError struct{ Found int }

func (e *FewLabelsError) Error() string {
	return fmt.Sprintf("model: need at least 2 different labels, found %d", e.Found)
}

// Summary is the training record stored under the model's "training"
// metadata key (Store). It holds no times, so the file stays reproducible.
type Summary struct {
	// Mode is model.ModeMulti for a multi-label model (FitMulti), else empty.
	Mode string `json:"mode,omitempty"`
	// Thresholds: how a multi-label model's per-label thresholds were
	// chosen on dev, and Goal the goal they were chosen for.
	Thresholds []LabelThreshold `json:"label_thresholds,omitempty"`
	Goal       string           `json:"label_threshold_goal,omitempty"`
	// The model card's own words (Recipe.Description, IntendedUse, NotFor).
	Description string `json:"description,omitempty"`
	IntendedUse string `json:"intended_use,omitempty"`
	NotFor      string `json:"not_for,omitempty"`
	// VectorsFile is Recipe.VectorsName.
	VectorsFile string `json:"vectors_file,omitempty"`
	// DevKnownShare is the share of the dev records' tokens that are
	// vocabulary words: what tag --stats compares a stream's share with.
	DevKnownShare *float64 `json:"dev_known_share,omitempty"`
	// Scorer is what tag scores records with.
	Scorer     string `json:"scorer,omitempty"`
	DataSHA256 string `json:"data_sha256"`
	// Files and DevFiles name the inputs; Fit leaves them to the caller.
	Files    []string `json:"files"`
	DevFiles []string `json:"dev_files,omitempty"`
	// Records counts "train" and "dev" records; the caller may add the
	// reader's "skipped" and "multi_label".
	Records    map[string]int            `json:"records"`
	Counts     map[string]map[string]int `json:"counts"`
	Vocabulary int                       `json:"vocabulary"`
	Coverage   *float64                  `json:"vector_coverage,omitempty"`
	Options    map[string]any            `json:"options"`
	EpochsRun  int                       `json:"epochs_run"`
	BestEpoch  int                       `json:"best_epoch"`
	Curve      []CurvePoint              `json:"curve"`
	Network    Scores                    `json:"network"`
	Baseline   BaselineScores            `json:"baseline"`
	// Mix is the linear baseline's and the mixture's dev figures, with
	// Recipe.MixBaseline.
	Mix *MixScores `json:"mix,omitempty"`

	// Seconds is the training time (not stored).
	Seconds float64 `json:"-"`
}

// CurvePoint is one epoch of Summary.Curve.
type CurvePoint struct {
	Epoch      int     `json:"epoch"`
	Loss       float64 `json:"loss"`
	TrainAcc   float64 `json:"train_accuracy"`
	DevAcc     float64 `json:"dev_accuracy"`
	DevMacroF1 float64 `json:"dev_macro_f1"`
}

// Scores are a classifier's figures on the dev records.
type Scores struct {
	DevAccuracy float64 `json:"dev_accuracy"`
	DevMacroF1  float64 `json:"dev_macro_f1"`
	// DevMicroF1 is the multi-label micro-averaged F1 (DevAccuracy is then
	// the subset accuracy); 0 for single-label.
	DevMicroF1 float64 `json:"dev_micro_f1,omitempty"`
	// DevPerLabel is precision, recall, F1 and support per label on the
	// dev records (the network's; empty without dev records).
	DevPerLabel []metrics.LabelStats `json:"dev_per_label,omitempty"`
}

// BaselineScores are the baseline's figures.
type BaselineScores struct {
	Kind string `json:"kind"`
	Scores
	Stored bool `json:"stored"` // counts kept in the model file's "baseline" tensor
}

// Store writes s as m's training metadata.
func (s *Summary) Store(m *model.Model) error {
	js, err := json.Marshal(s)
	if err != nil {
		return err
	}
	m.Meta[model.MetaTraining] = string(js)
	return nil
}

// tokenized is one record cut into tokens.
type tokenized struct {
	tokens []string
	label  string
	text   string
}

// Fit runs the recipe on the training records and the dev records, which
// pick the best epoch and are scored; with dev nil, a stratified
// DevFraction of train (chosen with Seed) is held out instead. Dev records
// of labels the model lacks are left out with a warning. The model it
// returns is trained, holds the baseline and, unless NoFold, the folded
// table; its training metadata is not set: add Files and DevFiles to the
// summary and Store it. Cancelling ctx stops training with ErrStopped.
func (r Recipe) Fit(ctx context.Context, trainRecs, dev []Record, p Progress) (*model.Model, *Summary, error) {
	if err := r.Check(); err != nil {
		return nil, nil, err
	}
	tok := token.New(token.Defaults())
	var ts token.Tokens
	cut := func(recs []Record) []tokenized {
		out := make([]tokenized, len(recs))
		for i, rec := range recs {
			tok.Tokenize(&ts, []byte(rec.Text))
			t := tokenized{label: rec.Label, text: rec.Text}
			for j := range ts.Len() {
				t.tokens = append(t.tokens, string(ts.At(j)))
			}
			out[i] = t
		}
		return out
	}
	all := cut(trainRecs)
	var tr, dv []tokenized
	if dev != nil {
		tr, dv = all, cut(dev)
	} else {
		labelsOf := labelIndex(all)
		idx := make([]int, len(all))
		for i, t := range all {
			idx[i] = labelsOf[t.label]
		}
		ti, di := StratifiedSplit(idx, r.DevFraction, r.Seed)
		for _, i := range ti {
			tr = append(tr, all[i])
		}
		for _, i := range di {
			dv = append(dv, all[i])
		}
	}
	labels := r.Labels
	if labels == nil {
		labels = sortedLabels(tr)
	}
	if len(labels) < 2 {
		return nil, nil, &FewLabelsError{Found: len(labels)}
	}
	counted := countMap(all)
	for _, l := range slices.Sorted(maps.Keys(counted)) {
		if counted[l] < 2 {
			p.warn("label %q has fewer than 2 records", l)
		}
	}
	li := map[string]int{}
	for i, l := range labels {
		li[l] = i
	}
	for _, t := range tr {
		if _, ok := li[t.label]; !ok {
			return nil, nil, fmt.Errorf("model: training record of label %q, not one of the recipe's labels", t.label)
		}
	}
	keptDev := dv[:0:0]
	for _, t := range dv {
		if _, ok := li[t.label]; ok {
			keptDev = append(keptDev, t)
		}
	}
	if n := len(dv) - len(keptDev); n > 0 {
		p.warn("%d dev records have labels absent from the training records and are not scored", n)
	}
	dv = keptDev
	if len(dv) == 0 {
		p.warn("no dev records: the last epoch is kept and no accuracy can be reported")
	}

	// Vocabulary and vectors.
	counts := map[string]int{}
	for _, t := range tr {
		for _, w := range t.tokens {
			counts[w]++
		}
	}
	words := BuildWords(counts, r.MinSeen, r.MaxWords)
	if r.Vectors != nil && r.Vectors.Dim != r.Dim {
		return nil, nil, fmt.Errorf("model: embedding size %d but %s has %d-dimensional vectors", r.Dim, r.VectorsName, r.Vectors.Dim)
	}
	m, err := model.New(r.Config(), token.Defaults(), labels, words, r.Seed)
	if err != nil {
		return nil, nil, err
	}
	var frozen []bool
	var coverage *float64
	if r.Vectors != nil {
		idx := r.Vectors.Index()
		if r.Freeze {
			frozen = make([]bool, m.Rows())
		}
		found, tokFound, tokAll := 0, 0, 0
		for i, w := range words {
			j, ok := idx[w]
			tokAll += counts[w]
			if !ok {
				continue
			}
			found++
			tokFound += counts[w]
			copy(m.Emb[(i+1)*r.Dim:(i+2)*r.Dim], r.Vectors.Vec(j))
			if frozen != nil {
				frozen[i+1] = true
			}
		}
		c := float64(found) / float64(max(len(words), 1))
		coverage = &c
		p.info("vectors: %s covers %d of %d vocabulary words (%.1f%%, %.1f%% of their training tokens); the rest start random",
			r.VectorsName, found, len(words), 100*c, 100*float64(tokFound)/float64(max(tokAll, 1)))
	}
	examples := func(ts []tokenized) []Example {
		out := make([]Example, len(ts))
		for i, t := range ts {
			rows := make([]int32, len(t.tokens))
			for j, w := range t.tokens {
				rows[j] = m.Vocab.Row([]byte(w))
			}
			out[i] = Example{Rows: rows, Label: li[t.label]}
		}
		return out
	}
	trEx, devEx := examples(tr), examples(dv)

	jobs := r.Jobs
	if jobs == 0 {
		jobs = runtime.GOMAXPROCS(0)
	}
	opt := TrainOptions{Epochs: r.Epochs, Patience: r.Patience, Batch: r.Batch, Seed: r.Seed,
		Jobs: jobs, Opt: r.Optimizer, LR: r.LR, Frozen: frozen, Stop: ctx.Done(),
		OnBatch: p.Batch, OnEpoch: p.Epoch}
	if r.Patience == 0 {
		opt.Patience = -1
	}
	if r.ClassWeights == ClassWeightsBalanced {
		opt.ClassWeights = BalancedWeights(trEx, len(labels))
	}
	p.info("training on %d records (%s), %d dev records; %d words + %d unseen-word rows, d=%d, widths %s x %d filters",
		len(tr), countString(tr, labels), len(dv), len(words), r.Buckets, r.Dim, intsString(r.Widths), r.Filters)
	res, err := Train(m, trEx, devEx, opt)
	if err != nil {
		return nil, nil, err
	}

	// The baseline, on the same training records.
	docs, ys := make([][]string, len(tr)), make([]int, len(tr))
	for i, t := range tr {
		docs[i], ys[i] = t.tokens, li[t.label]
	}
	base, err := nb.Fit(docs, ys, len(labels), 1)
	if err != nil {
		return nil, nil, fmt.Errorf("model: baseline: %w", err)
	}
	gold, pred := make([]int, len(dv)), make([]int, len(dv))
	for i, t := range dv {
		gold[i], pred[i] = li[t.label], base.Predict(t.tokens)
	}
	bs := BaselineScores{Kind: BaselineKind}
	if len(dv) > 0 {
		bs.DevAccuracy, bs.DevMacroF1 = metrics.Accuracy(gold, pred), metrics.MacroF1(metrics.PerLabel(metrics.Confusion(gold, pred, len(labels)), nil))
	}
	// The baseline is always stored, whatever its size (it grows with the
	// distinct unigrams and bigrams): it is a byte tensor that opening
	// maps without parsing.
	m.Baseline = base.Encode()
	bs.Stored = true

	netScores := Scores{DevAccuracy: res.DevAcc, DevMacroF1: res.DevMacroF1}
	var devKnown *float64
	var devProbs [][]float32
	if len(dv) > 0 {
		pr := m.NewPredictor()
		npred := make([]int, len(dv))
		toks, known := 0, 0
		for i, t := range dv {
			pn := pr.Predict([]byte(t.text))
			devProbs = append(devProbs, slices.Clone(pn))
			npred[i], _ = metrics.Predict(pn)
			toks += pr.TokenCount()
			known += pr.KnownCount()
		}
		if toks > 0 {
			share := round6(float64(known) / float64(toks))
			devKnown = &share
		}
		netScores.DevPerLabel = metrics.PerLabel(metrics.Confusion(gold, npred, len(labels)), labels)
	}
	var mix *MixScores
	if r.MixBaseline && len(dv) > 0 {
		devDocs, devY := make([][]string, len(dv)), make([]int, len(dv))
		for i, t := range dv {
			devDocs[i], devY[i] = t.tokens, li[t.label]
		}
		lm, ch, err := linear.Choose(docs, ys, devDocs, devY, len(labels), nil, linear.Options{Tolerance: 1e-6})
		if err != nil {
			return nil, nil, fmt.Errorf("model: linear baseline: %w", err)
		}
		m.Linear = lm
		lp := lm.NewPredictor()
		basePr := make([][]float64, len(dv))
		for i, d := range devDocs {
			basePr[i] = slices.Clone(lp.Probs(d))
		}
		mix = ChooseMix(devProbs, basePr, devY)
		mix.LinearC = ch.C
		m.Scorer = mix.Scorer
		p.info("linear baseline (C %g): dev accuracy %.4f; mixture weight %g: dev accuracy %.4f; tag scores with %s",
			ch.C, mix.Baseline, mix.Scorer.Weight, mix.Mixed, mix.Scorer)
	}
	sum := &Summary{
		Description: r.Description, IntendedUse: r.IntendedUse, NotFor: r.NotFor,
		VectorsFile: r.VectorsName, Scorer: m.Scorer.String(), Mix: mix, DevKnownShare: devKnown,
		DataSHA256: dataHash(tr, dv),
		Records:    map[string]int{"train": len(tr), "dev": len(dv)},
		Counts:     map[string]map[string]int{"train": countMap(tr), "dev": countMap(dv)},
		Vocabulary: len(words), Coverage: coverage,
		Options: map[string]any{"epochs": r.Epochs, "patience": r.Patience, "batch": r.Batch, "seed": r.Seed,
			"jobs": jobs, "optimizer": r.Optimizer, "learning_rate": r.LR, "min_seen": r.MinSeen,
			"max_words": r.MaxWords, "class_weights": r.ClassWeights, "freeze_vectors": r.Freeze,
			"dropout": DefaultDropout, "max_norm": DefaultMaxNorm, "dev_fraction": r.DevFraction},
		EpochsRun: res.EpochsRun, BestEpoch: res.BestEpoch,
		Network:  netScores,
		Baseline: bs,
		Seconds:  res.Seconds,
	}
	for _, e := range res.Curve {
		sum.Curve = append(sum.Curve, CurvePoint{e.Epoch, round6(e.Loss), e.TrainAcc, e.DevAcc, e.DevMacroF1})
	}
	m.Meta[MetaSeen] = SeenMeta(textsOf(tr), textsOf(dv))
	if !r.NoFold {
		model.FoldModel(m, r.FoldHalf)
	}
	return m, sum, nil
}

func labelIndex(ts []tokenized) map[string]int {
	l := sortedLabels(ts)
	m := make(map[string]int, len(l))
	for i, s := range l {
		m[s] = i
	}
	return m
}

func sortedLabels(ts []tokenized) []string {
	seen := map[string]bool{}
	var l []string
	for _, t := range ts {
		if !seen[t.label] {
			seen[t.label] = true
			l = append(l, t.label)
		}
	}
	slices.Sort(l)
	return l
}

func countMap(ts []tokenized) map[string]int {
	c := map[string]int{}
	for _, t := range ts {
		c[t.label]++
	}
	return c
}

func countString(ts []tokenized, labels []string) string {
	c := countMap(ts)
	parts := make([]string, len(labels))
	for i, l := range labels {
		parts[i] = l + " " + strconv.Itoa(c[l])
	}
	return strings.Join(parts, ", ")
}

func intsString(v []int) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = strconv.Itoa(x)
	}
	return strings.Join(s, ",")
}

// dataHash is the SHA-256 of the training and dev records (label, NUL,
// text, newline each; the dev part after a separator line), in order.
func dataHash(train, dev []tokenized) string {
	h := sha256.New()
	for i, part := range [][]tokenized{train, dev} {
		if i > 0 {
			io.WriteString(h, "\x01\n")
		}
		for _, t := range part {
			io.WriteString(h, t.label)
			h.Write([]byte{0})
			io.WriteString(h, t.text)
			h.Write([]byte{'\n'})
		}
	}
	return hex.EncodeToString(h.Sum(nil))
}

func round6(x float64) float64 {
	v, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'g', 6, 64), 64)
	return v
}

// textsOf returns the records' texts.
func textsOf(recs []tokenized) []string {
	out := make([]string, len(recs))
	for i, r := range recs {
		out[i] = r.text
	}
	return out
}
