package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"

	"convtag/model"
	"convtag/model/metrics"
	"convtag/model/nb"
	"convtag/model/token"
	"convtag/model/train"
	"convtag/model/vectors"
	"convtag/stream"
)

func init() { commands = append(commands, newTrainCmd) }

// Defaults of the training recipe that are the command's own (the rest are
// model's constants). train and eval --folds both use them, so that a
// cross-validated recipe is the one train would run.
const (
	defaultDevFraction  = 0.1
	defaultSeed         = 1
	defaultMinCount     = 1 // every word seen in training gets its own row
	defaultClassWeights = "none"
)

// trainFlags are the train command's settings.
type trainFlags struct {
	output, dev, vectors, classWeights, optimizer string
	description, intendedUse, notFor              string
	labelledFlags
	devFraction, lr                                                float64
	dim, filters, epochs, patience, batch, jobs, minCount, buckets int
	hidden, maxWords                                               int
	widths                                                         []int
	seed                                                           uint64
	freeze, noFold, foldHalf, quiet                                bool
	dimSet                                                         bool
}

func newTrainCmd(a *app) *cobra.Command {
	var f trainFlags
	c := &cobra.Command{
		Use:   "train -o MODEL [flags] FILE...",
		Short: "Train a model from labelled records",
		Long: `train learns a tagger from labelled records and writes one model file.

Records are JSON Lines, the text under --text-key (a dotted path; repeat the
flag to join several values with a space) and the tag under --label-key (a
string, or an array of strings for records with several tags: training uses
the first and says how many had more). --format csv and --format tsv read
RFC 4180 records after a header row (TSV: tabs between the fields, the
same quoting), the text in the --text-column columns and the label in
--label-column; a header is never trained on, and one that lacks a named
column is an error. --format label-tab-text reads "label<TAB>text" lines
without a header. FILEs may be plain, gzip, zstd or bzip2 ("-" is standard
input). Records without text or label are counted and the first few shown
with file and line; they are never used silently.

A share of each tag's records (--dev-fraction, chosen with --seed) is held
out to pick the best epoch, unless --dev names a file of its own. The
network is the one in README.md: embeddings, convolutions of --widths with
--filters each, max-over-time pooling, dropout, softmax. Defaults follow
Kim (2014), "Convolutional Neural Networks for Sentence Classification":
widths 3,4,5 with 100 filters, dropout 0.5, max-norm 3 on the output rows,
mini-batches of 50, Adadelta (rho 0.95, eps 1e-6), 25 epochs.

Beside the network, a naive-Bayes classifier on lowercase unigrams and
bigrams is trained on the same records, and both dev accuracies are printed
at the end: if the baseline wins, the network is not earning its keep.
The same data, flags, --seed and --jobs give a byte-identical model file.

The model file holds every word seen in training and the baseline's word
pairs, in plain bytes: names and rare words from people's messages can be
read from it (URLs, e-mail addresses, @handles and numbers are replaced by
placeholders first). Share it only where the training text may go (README,
"What a model file reveals").

The -o file is checked before any record is read: it must not be a
directory or one of the input files, and its directory must take a new
file. The model is written to a temporary file beside it and renamed into
place, so a failed or interrupted run leaves the old file as it was.
Signals: SIGINT and SIGTERM stop training, write nothing and exit with
status 1; one that arrives while the model file is being written lets it
finish, and the run ends as usual.

` + exitHelp,
		Example: `  convtag train -o ferry.safetensors testdata/demo/train.jsonl --dev testdata/demo/dev.jsonl
  convtag train -o m.safetensors --format tsv --text-column message --label-column queue --epochs 10 tickets.tsv.gz
  convtag train -o m.safetensors --text-key msg.subject --text-key msg.body --label-key tags chat.jsonl
  convtag train -o ferry.safetensors --intended-use 'routing help-chat lines to a desk' --not-for 'any decision about the writer' train.jsonl`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			f.dimSet = cmd.Flags().Changed("vector-size")
			f.noteChanged(cmd.Flags())
			return runTrain(a, &f, args)
		},
	}
	fl := c.Flags()
	fl.StringVarP(&f.output, "output", "o", "", "model file to write (required)")
	f.labelledFlags.add(fl)
	fl.StringVar(&f.dev, "dev", "", "held-out records for early stopping and the reported accuracy, instead of --dev-fraction")
	fl.Float64Var(&f.devFraction, "dev-fraction", defaultDevFraction, "share of each tag's records held out when there is no --dev")
	fl.IntVar(&f.dim, "vector-size", model.DefaultDim, "embedding size (with --vectors, the vectors' own size unless given)")
	fl.IntSliceVar(&f.widths, "widths", model.DefaultWidths, "convolution window widths, in words")
	fl.IntVar(&f.filters, "filters", model.DefaultFilters, "filters per width")
	fl.IntVar(&f.hidden, "hidden", 0, "size of a ReLU hidden layer before the output; 0 for none")
	fl.IntVar(&f.epochs, "epochs", train.DefaultEpochs, "most epochs")
	fl.IntVar(&f.patience, "patience", train.DefaultPatience, "stop after this many epochs without a better dev accuracy; 0 never stops early")
	fl.IntVar(&f.batch, "batch", train.DefaultBatch, "mini-batch size")
	fl.Uint64Var(&f.seed, "seed", defaultSeed, "seed for initialisation, the dev split, shuffling and dropout")
	fl.IntVarP(&f.jobs, "jobs", "j", 0, "worker threads (default: all cores); the model depends on it")
	fl.StringVar(&f.optimizer, "optimizer", train.OptAdadelta, "adadelta or adam")
	fl.Float64Var(&f.lr, "learning-rate", 0, "learning rate (default: 1 for adadelta, 0.001 for adam)")
	fl.IntVar(&f.minCount, "min-seen", defaultMinCount, "words seen fewer times have no row of their own and share the --unseen-rows")
	fl.IntVar(&f.maxWords, "max-words", 0, "keep at most this many words, most frequent first; 0 for all")
	fl.IntVar(&f.buckets, "unseen-rows", model.DefaultBuckets, "rows shared, by a hash of the word, among words with no row of their own")
	fl.StringVar(&f.vectors, "vectors", "", "initial word vectors (text or binary word-vector format; plain, gzip, zstd or bzip2)")
	fl.BoolVar(&f.freeze, "freeze-vectors", false, "keep the rows taken from --vectors fixed")
	fl.StringVar(&f.classWeights, "class-weights", defaultClassWeights, "none, or balanced to weight each tag's loss by n/(tags*n_tag)")
	fl.BoolVar(&f.noFold, "no-fold", false, "do not write the folded table (smaller file, slower tagging)")
	fl.BoolVar(&f.foldHalf, "fold-half", false, "store the folded table in half precision (half the size)")
	fl.BoolVarP(&f.quiet, "quiet", "q", false, "no progress on stderr")
	fl.StringVar(&f.description, "description", "", "what the model tags and from what data, in a sentence or two (shown first by inspect)")
	fl.StringVar(&f.intendedUse, "intended-use", "", "what the model's tags are meant for (shown first by inspect)")
	fl.StringVar(&f.notFor, "not-for", "", "uses the model is not fit for (shown first by inspect)")
	return c
}

func (f *trainFlags) check(args []string) error {
	switch {
	case f.output == "":
		return usageErr("convtag train -o MODEL FILE...", "train: no output file (-o)")
	case len(args) == 0:
		return usageErr("convtag train -o MODEL FILE...", "train: no input files")
	case f.labelledFlags.check("train") != nil:
		return f.labelledFlags.check("train")
	case f.dev == "" && !(f.devFraction > 0 && f.devFraction < 1):
		return usageErr("--dev-fraction 0.1, or --dev FILE", "train: --dev-fraction %g is not between 0 and 1", f.devFraction)
	case f.epochs < 1 || f.batch < 1 || f.patience < 0 || f.jobs < 0:
		return usageErr("", "train: --epochs and --batch must be at least 1, --patience and --jobs at least 0")
	case f.minCount < 1 || f.maxWords < 0:
		return usageErr("", "train: --min-seen must be at least 1 and --max-words at least 0")
	case f.optimizer != train.OptAdadelta && f.optimizer != train.OptAdam:
		return usageErr("--optimizer adadelta or --optimizer adam", "train: unknown --optimizer %q", f.optimizer)
	case f.classWeights != "none" && f.classWeights != "balanced":
		return usageErr("--class-weights none or --class-weights balanced", "train: unknown --class-weights %q", f.classWeights)
	case f.freeze && f.vectors == "":
		return usageErr("--vectors FILE --freeze-vectors", "train: --freeze-vectors without --vectors")
	}
	return nil
}

// trainSummary is the training record stored under the model's "training"
// metadata key. It holds no times, so the file stays reproducible.
type trainSummary struct {
	// The model card's own words, from --description, --intended-use and
	// --not-for.
	Description string `json:"description,omitempty"`
	IntendedUse string `json:"intended_use,omitempty"`
	NotFor      string `json:"not_for,omitempty"`
	// VectorsFile is the base name of the --vectors file, if any.
	VectorsFile string `json:"vectors_file,omitempty"`
	// DevKnownShare is the share of the dev records' tokens that are
	// vocabulary words: what tag --stats compares a stream's share with.
	DevKnownShare *float64 `json:"dev_known_share,omitempty"`
	// Scorer is what tag scores records with.
	Scorer     string                    `json:"scorer,omitempty"`
	DataSHA256 string                    `json:"data_sha256"`
	Files      []string                  `json:"files"`
	DevFiles   []string                  `json:"dev_files,omitempty"`
	Records    map[string]int            `json:"records"`
	Counts     map[string]map[string]int `json:"counts"`
	Vocabulary int                       `json:"vocabulary"`
	Coverage   *float64                  `json:"vector_coverage,omitempty"`
	Options    map[string]any            `json:"options"`
	EpochsRun  int                       `json:"epochs_run"`
	BestEpoch  int                       `json:"best_epoch"`
	Curve      []curvePoint              `json:"curve"`
	Network    scores                    `json:"network"`
	Baseline   baselineScores            `json:"baseline"`
}

type curvePoint struct {
	Epoch      int     `json:"epoch"`
	Loss       float64 `json:"loss"`
	TrainAcc   float64 `json:"train_accuracy"`
	DevAcc     float64 `json:"dev_accuracy"`
	DevMacroF1 float64 `json:"dev_macro_f1"`
}

type scores struct {
	DevAccuracy float64 `json:"dev_accuracy"`
	DevMacroF1  float64 `json:"dev_macro_f1"`
	// DevPerLabel is precision, recall, F1 and support per label on the
	// dev records (the network's; empty without dev records).
	DevPerLabel []metrics.LabelStats `json:"dev_per_label,omitempty"`
}

type baselineScores struct {
	Kind string `json:"kind"`
	scores
	Stored bool `json:"stored"` // counts kept in the model file's "baseline" tensor
}

// tokenized is one record cut into tokens, with its first label.
type tokenized struct {
	tokens []string
	label  string
	text   string
}

func runTrain(a *app, f *trainFlags, args []string) error {
	if err := f.check(args); err != nil {
		return err
	}
	if err := checkOutput("train", f.output, append([]string{f.dev, f.vectors}, args...)...); err != nil {
		return err
	}
	ctx, stop := notifyInterrupt()
	defer stop()
	say := func(format string, v ...any) {
		if !f.quiet {
			fmt.Fprintf(a.stderr, "convtag: "+format+"\n", v...)
		}
	}
	ropt := f.options(a)
	set, err := untilDone(ctx, func() (*stream.LabelledSet, error) { return readLabelled(a, args, ropt, "training") })
	if err != nil {
		return err
	}
	tok := token.New(token.Settings{})
	var ts token.Tokens
	cut := func(recs []stream.Labelled) []tokenized {
		out := make([]tokenized, len(recs))
		for i, r := range recs {
			tok.Tokenize(&ts, []byte(r.Text))
			t := tokenized{label: r.Labels[0], text: r.Text}
			for j := range ts.Len() {
				t.tokens = append(t.tokens, string(ts.At(j)))
			}
			out[i] = t
		}
		return out
	}
	all := cut(set.Records)
	var trainRecs, dev []tokenized
	var devFiles []string
	if f.dev != "" {
		devFiles = []string{f.dev}
		dset, err := untilDone(ctx, func() (*stream.LabelledSet, error) { return readLabelled(a, devFiles, ropt, "dev") })
		if err != nil {
			return err
		}
		trainRecs, dev = all, cut(dset.Records)
	} else {
		labelsOf := labelIndex(all)
		idx := make([]int, len(all))
		for i, t := range all {
			idx[i] = labelsOf[t.label]
		}
		tr, dv := train.StratifiedSplit(idx, f.devFraction, f.seed)
		for _, i := range tr {
			trainRecs = append(trainRecs, all[i])
		}
		for _, i := range dv {
			dev = append(dev, all[i])
		}
	}
	labels := sortedLabels(trainRecs)
	if len(labels) < 2 {
		return withCode(exitFailure, fmt.Errorf("train: %s: need at least 2 different labels, found %d", strings.Join(args, ", "), len(labels)))
	}
	for _, l := range set.Rare() {
		fmt.Fprintf(a.stderr, "convtag: warning: label %q has fewer than 2 records\n", l)
	}
	li := map[string]int{}
	for i, l := range labels {
		li[l] = i
	}
	keptDev := dev[:0:0]
	for _, t := range dev {
		if _, ok := li[t.label]; ok {
			keptDev = append(keptDev, t)
		}
	}
	if n := len(dev) - len(keptDev); n > 0 {
		fmt.Fprintf(a.stderr, "convtag: warning: %d dev records have labels absent from the training records and are not scored\n", n)
	}
	dev = keptDev
	if len(dev) == 0 {
		fmt.Fprintf(a.stderr, "convtag: warning: no dev records: the last epoch is kept and no accuracy can be reported\n")
	}

	// Vocabulary and vectors.
	counts := map[string]int{}
	for _, t := range trainRecs {
		for _, w := range t.tokens {
			counts[w]++
		}
	}
	words := train.BuildWords(counts, f.minCount, f.maxWords)
	var vecs *vectors.Set
	if f.vectors != "" {
		vf, err := stream.Open(f.vectors, nil)
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("train: %w", err))
		}
		vecs, err = untilDone(ctx, func() (*vectors.Set, error) { return vectors.Read(vf) })
		vf.Close()
		if errors.Is(err, errInterrupted) {
			return err
		}
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("train: %s: %w", f.vectors, err))
		}
		if f.dimSet && f.dim != vecs.Dim {
			return usageErr("leave out --vector-size to use the vectors' size", "train: --vector-size %d but %s has %d-dimensional vectors", f.dim, f.vectors, vecs.Dim)
		}
		f.dim = vecs.Dim
	}
	cfg := model.Config{Dim: f.dim, Widths: f.widths, Filters: f.filters, Hidden: f.hidden, Buckets: f.buckets}
	if err := cfg.Validate(); err != nil {
		return usageErr("", "train: %w", err)
	}
	m, err := model.New(cfg, token.Settings{}, labels, words, f.seed)
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("train: %w", err))
	}
	var frozen []bool
	var coverage *float64
	if vecs != nil {
		idx := vecs.Index()
		if f.freeze {
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
			copy(m.Emb[(i+1)*f.dim:(i+2)*f.dim], vecs.Vec(j))
			if frozen != nil {
				frozen[i+1] = true
			}
		}
		c := float64(found) / float64(max(len(words), 1))
		coverage = &c
		say("vectors: %s covers %d of %d vocabulary words (%.1f%%, %.1f%% of their training tokens); the rest start random",
			f.vectors, found, len(words), 100*c, 100*float64(tokFound)/float64(max(tokAll, 1)))
	}
	examples := func(ts []tokenized) []train.Example {
		out := make([]train.Example, len(ts))
		for i, t := range ts {
			rows := make([]int32, len(t.tokens))
			for j, w := range t.tokens {
				rows[j] = m.Vocab.Row([]byte(w))
			}
			out[i] = train.Example{Rows: rows, Label: li[t.label]}
		}
		return out
	}
	trEx, devEx := examples(trainRecs), examples(dev)

	if f.jobs == 0 {
		f.jobs = runtime.GOMAXPROCS(0)
	}
	opt := train.TrainOptions{Epochs: f.epochs, Patience: f.patience, Batch: f.batch, Seed: f.seed,
		Jobs: f.jobs, Opt: f.optimizer, LR: f.lr, Frozen: frozen, Stop: ctx.Done()}
	if f.patience == 0 {
		opt.Patience = -1
	}
	if f.classWeights == "balanced" {
		opt.ClassWeights = train.BalancedWeights(trEx, len(labels))
	}
	say("training on %d records (%s), %d dev records; %d words + %d unseen-word rows, d=%d, widths %s x %d filters",
		len(trainRecs), countString(trainRecs, labels), len(dev), len(words), f.buckets, f.dim, intsString(f.widths), f.filters)
	bar := newTrainBar(a, f.quiet, len(trEx))
	start := time.Now()
	opt.OnBatch = func(done, total int) {
		if bar != nil {
			bar.Set(done)
		}
	}
	opt.OnEpoch = func(e train.EpochStats) {
		if bar != nil {
			bar.Reset()
			bar.Clear()
		}
		el := time.Since(start)
		left := time.Duration(float64(el) / float64(e.Epoch) * float64(f.epochs-e.Epoch))
		say("epoch %d/%d  loss %.4f  train %.4f  dev %.4f  dev macro-F1 %.4f  %s tokens/s  elapsed %s  left <= %s",
			e.Epoch, f.epochs, e.Loss, e.TrainAcc, e.DevAcc, e.DevMacroF1, humanRate(float64(e.Tokens)/e.Seconds),
			el.Round(time.Second), left.Round(time.Second))
	}
	res, err := train.Train(m, trEx, devEx, opt)
	if bar != nil {
		bar.Finish()
	}
	if errors.Is(err, train.ErrStopped) {
		return withCode(exitFailure, errInterrupted)
	}
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("train: %w", err))
	}

	// The baseline, on the same training records.
	docs, ys := make([][]string, len(trainRecs)), make([]int, len(trainRecs))
	for i, t := range trainRecs {
		docs[i], ys[i] = t.tokens, li[t.label]
	}
	base, err := nb.Fit(docs, ys, len(labels), 1)
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("train: baseline: %w", err))
	}
	gold, pred := make([]int, len(dev)), make([]int, len(dev))
	for i, t := range dev {
		gold[i], pred[i] = li[t.label], base.Predict(t.tokens)
	}
	bs := baselineScores{Kind: "multinomial naive Bayes, lowercase unigrams+bigrams, Laplace smoothing"}
	if len(dev) > 0 {
		bs.DevAccuracy, bs.DevMacroF1 = metrics.Accuracy(gold, pred), metrics.MacroF1(metrics.PerLabel(metrics.Confusion(gold, pred, len(labels)), nil))
	}
	// The baseline is always stored, whatever its size (it grows with the
	// distinct unigrams and bigrams): it is a byte tensor that opening
	// maps without parsing.
	m.Baseline = base.Encode()
	bs.Stored = true
	// Said even with -q: it is what the file holds, not progress.
	fmt.Fprintf(a.stderr, "convtag: baseline: naive Bayes, %s stored\n", humanBytes(len(m.Baseline)))

	netScores := scores{DevAccuracy: res.DevAcc, DevMacroF1: res.DevMacroF1}
	var devKnown *float64
	if len(dev) > 0 {
		p := m.NewPredictor()
		npred := make([]int, len(dev))
		toks, known := 0, 0
		for i, t := range dev {
			npred[i], _ = metrics.Predict(p.Predict([]byte(t.text)))
			toks += p.TokenCount()
			known += p.KnownCount()
		}
		if toks > 0 {
			share := round6(float64(known) / float64(toks))
			devKnown = &share
		}
		netScores.DevPerLabel = metrics.PerLabel(metrics.Confusion(gold, npred, len(labels)), labels)
	}
	vecName := ""
	if f.vectors != "" {
		vecName = filepath.Base(f.vectors)
	}
	if f.description == "" && f.intendedUse == "" && f.notFor == "" {
		fmt.Fprintln(a.stderr, "convtag: reminder: say what this model is for and not for (--description, --intended-use, --not-for); inspect shows them first")
	}
	sum := trainSummary{
		Description: f.description, IntendedUse: f.intendedUse, NotFor: f.notFor,
		VectorsFile: vecName, Scorer: "network", DevKnownShare: devKnown,
		DataSHA256: dataHash(trainRecs, dev),
		Files:      baseNames(args), DevFiles: baseNames(devFiles),
		Records:    map[string]int{"train": len(trainRecs), "dev": len(dev), "skipped": set.Skipped, "multi_label": set.Multi},
		Counts:     map[string]map[string]int{"train": countMap(trainRecs), "dev": countMap(dev)},
		Vocabulary: len(words), Coverage: coverage,
		Options: map[string]any{"epochs": f.epochs, "patience": f.patience, "batch": f.batch, "seed": f.seed,
			"jobs": opt.Jobs, "optimizer": f.optimizer, "learning_rate": f.lr, "min_seen": f.minCount,
			"max_words": f.maxWords, "class_weights": f.classWeights, "freeze_vectors": f.freeze,
			"dropout": train.DefaultDropout, "max_norm": train.DefaultMaxNorm, "dev_fraction": f.devFraction},
		EpochsRun: res.EpochsRun, BestEpoch: res.BestEpoch,
		Network:  netScores,
		Baseline: bs,
	}
	for _, e := range res.Curve {
		sum.Curve = append(sum.Curve, curvePoint{e.Epoch, round6(e.Loss), e.TrainAcc, e.DevAcc, e.DevMacroF1})
	}
	js, err := json.Marshal(sum)
	if err != nil {
		return withCode(exitFailure, err)
	}
	m.Meta[model.MetaTraining] = string(js)
	if !f.noFold {
		model.FoldModel(m, f.foldHalf)
	}
	beforeSave(ctx)
	// The last point to give up: once saving has begun, the signals stay
	// caught and the file is finished.
	if ctx.Err() != nil {
		return withCode(exitFailure, errInterrupted)
	}
	if err := m.Save(f.output, model.SaveOptions{Version: version}); err != nil {
		return withCode(exitFailure, fmt.Errorf("train: %w", err))
	}
	w := a.stdout
	if len(dev) > 0 {
		fmt.Fprintf(w, "dev accuracy: network %.4f (macro-F1 %.4f, epoch %d of %d)   naive Bayes %.4f (macro-F1 %.4f)\n",
			res.DevAcc, res.DevMacroF1, res.BestEpoch, res.EpochsRun, bs.DevAccuracy, bs.DevMacroF1)
		if bs.DevAccuracy > res.DevAcc {
			fmt.Fprintf(w, "the baseline beats the network on these dev records\n")
		}
	}
	fmt.Fprintf(w, "wrote %s (%d labels, %d words, %.1fs)\n", f.output, len(labels), len(words), res.Seconds)
	return nil
}

// beforeSave is called just before the model is written; tests use it to
// send a signal at that point.
var beforeSave = func(context.Context) {}

// baseNames gives each file's base name, so that the model file does not
// record where its data lived (its data_sha256 identifies the data).
func baseNames(files []string) []string {
	if files == nil {
		return nil
	}
	out := make([]string, len(files))
	for i, name := range files {
		out[i] = name
		if name != "-" {
			out[i] = filepath.Base(name)
		}
	}
	return out
}

// readLabelled reads records and reports skipped ones on stderr: every
// problem kept (the first few) with file and line, then the count.
func readLabelled(a *app, files []string, opt stream.LabelledOptions, what string) (*stream.LabelledSet, error) {
	set, err := stream.ReadLabelled(files, opt)
	if set != nil {
		for _, p := range set.Problems {
			fmt.Fprintf(a.stderr, "convtag: %s\n", p)
		}
		if set.Skipped > 0 {
			fmt.Fprintf(a.stderr, "convtag: %d %s records skipped (no text, no label or malformed)\n", set.Skipped, what)
		}
		if set.Multi > 0 {
			fmt.Fprintf(a.stderr, "convtag: %d %s records have several labels; training uses the first of each\n", set.Multi, what)
		}
	}
	if err != nil {
		var ie *stream.InputError
		var he *stream.HeaderError
		switch {
		case errors.As(err, &he):
			return nil, headerErr(err, true)
		case errors.As(err, &ie):
			return nil, withCode(exitFailure, err)
		}
		return nil, withCode(exitFailure, fmt.Errorf("train: %w", err))
	}
	return set, nil
}

func newTrainBar(a *app, quiet bool, total int) *progressbar.ProgressBar {
	f, ok := a.stderr.(*os.File)
	if quiet || !ok || !isatty.IsTerminal(f.Fd()) {
		return nil
	}
	return progressbar.NewOptions(total,
		progressbar.OptionSetWriter(a.stderr),
		progressbar.OptionSetDescription("epoch"),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionThrottle(200*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
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
func dataHash(trainRecs, dev []tokenized) string {
	h := sha256.New()
	for i, part := range [][]tokenized{trainRecs, dev} {
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

func humanRate(r float64) string {
	switch {
	case r >= 1e6:
		return fmt.Sprintf("%.2fM", r/1e6)
	case r >= 1e3:
		return fmt.Sprintf("%.1fk", r/1e3)
	}
	return fmt.Sprintf("%.0f", r)
}

// humanBytes is n in decimal units: "812 B", "40.3 kB", "5.2 MB".
func humanBytes(n int) string {
	switch {
	case n >= 1e9:
		return fmt.Sprintf("%.1f GB", float64(n)/1e9)
	case n >= 1e6:
		return fmt.Sprintf("%.1f MB", float64(n)/1e6)
	case n >= 1e3:
		return fmt.Sprintf("%.1f kB", float64(n)/1e3)
	}
	return fmt.Sprintf("%d B", n)
}

func round6(x float64) float64 {
	v, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'g', 6, 64), 64)
	return v
}
