package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"

	"convtag/model"
	"convtag/model/train"
	"convtag/model/vectors"
	"convtag/stream"
)

func init() { commands = append(commands, newTrainCmd) }

// trainFlags are the train command's settings: the recipe's (train.Recipe's
// FlagSet, shared with eval --folds) and the command's own.
type trainFlags struct {
	output, dev, vectors string
	labelledFlags
	r      train.Recipe
	quiet  bool
	dimSet bool
	// multi is --multi-label; multiSet whether it was given (else the
	// mode follows the data: arrays as labels mean multi-label).
	multi, multiSet bool
	goal            string // --label-threshold-goal
}

func newTrainCmd(a *app) *cobra.Command {
	f := trainFlags{r: train.Defaults()}
	c := &cobra.Command{
		Use:   "train -o MODEL [flags] FILE...",
		Short: "Train a model from labelled records",
		Long: `train learns a tagger from labelled records and writes one model file.

Records are JSON Lines, the text under --text-key (a dotted path; repeat the
flag to join several values with a space) and the tag under --label-key (a
string, or an array of strings for records with several tags). --format csv and --format tsv read
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

Multi-label: with --multi-label, or on its own when some record's label is
a JSON array (said on stderr; --multi-label=false trains on each record's
first tag instead), the network has one sigmoid output per tag, trained
with binary cross-entropy, and a record gets every tag whose probability
reaches that tag's threshold, or none ("label": [] is a record with no
tag). Each tag's threshold is chosen on the dev records and stored in the
model: the one with the best F1 (--label-threshold-goal f1), or the lowest
whose precision reaches P and stays there above it (precision:P); a tag
without dev records keeps 0.5. --class-weights balanced weights each
tag's positive records by its negatives/positives. CSV, TSV and
label-tab-text records have one tag each; multi-label data is JSON Lines.

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
  convtag train -o desks.safetensors --multi-label --label-threshold-goal precision:0.9 testdata/demo/multi-train.jsonl
  convtag train -o ferry.safetensors --intended-use 'routing help-chat lines to a desk' --not-for 'any decision about the writer' train.jsonl`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			f.dimSet = cmd.Flags().Changed("vector-size")
			f.multiSet = cmd.Flags().Changed("multi-label")
			f.noteChanged(cmd.Flags())
			return runTrain(a, &f, args)
		},
	}
	fl := c.Flags()
	fl.StringVarP(&f.output, "output", "o", "", "model file to write (required)")
	f.labelledFlags.add(fl)
	fl.StringVar(&f.dev, "dev", "", "held-out records for early stopping and the reported accuracy, instead of --dev-fraction")
	fl.AddFlagSet(f.r.FlagSet())
	fl.StringVar(&f.vectors, "vectors", "", "initial word vectors (text or binary word-vector format; plain, gzip, zstd or bzip2)")
	fl.BoolVar(&f.r.Freeze, "freeze-vectors", false, "keep the rows taken from --vectors fixed")
	fl.BoolVar(&f.r.NoFold, "no-fold", false, "do not write the folded table (smaller file, slower tagging)")
	fl.BoolVar(&f.r.FoldHalf, "fold-half", false, "store the folded table in half precision (half the size)")
	fl.BoolVarP(&f.quiet, "quiet", "q", false, "no progress on stderr")
	fl.BoolVar(&f.multi, "multi-label", false, "several tags per record (one sigmoid per tag); the default when labels are arrays")
	fl.StringVar(&f.goal, "label-threshold-goal", "f1", "multi-label: each tag's stored threshold maximises its dev F1 (f1), or is the lowest reaching dev precision P (precision:P)")
	fl.StringVar(&f.r.Description, "description", "", "what the model tags and from what data, in a sentence or two (shown first by inspect)")
	fl.StringVar(&f.r.IntendedUse, "intended-use", "", "what the model's tags are meant for (shown first by inspect)")
	fl.StringVar(&f.r.NotFor, "not-for", "", "uses the model is not fit for (shown first by inspect)")
	return c
}

func (f *trainFlags) check(args []string) error {
	recipeErr := f.r.Check()
	switch {
	case f.output == "":
		return usageErr("convtag train -o MODEL FILE...", "train: no output file (-o)")
	case len(args) == 0:
		return usageErr("convtag train -o MODEL FILE...", "train: no input files")
	case f.labelledFlags.check("train") != nil:
		return f.labelledFlags.check("train")
	case f.dev == "" && !(f.r.DevFraction > 0 && f.r.DevFraction < 1):
		return usageErr("--dev-fraction 0.1, or --dev FILE", "train: --dev-fraction %g is not between 0 and 1", f.r.DevFraction)
	case recipeErr != nil:
		return usageErr("convtag train --help (the recipe's flags)", "train: %w", recipeErr)
	case f.r.Freeze && f.vectors == "":
		return usageErr("--vectors FILE --freeze-vectors", "train: --freeze-vectors without --vectors")
	}
	g, err := train.ParseThresholdGoal(f.goal)
	if err != nil {
		return usageErr("--label-threshold-goal f1, or --label-threshold-goal precision:0.9", "train: %v", err)
	}
	f.r.ThresholdGoal = g
	if f.multiSet && f.multi && f.format != stream.LabelledJSONL {
		return usageErr("--format jsonl with an array of tags under --label-key", "train: --multi-label reads JSON Lines (--format %s has one tag per record)", f.format)
	}
	return nil
}

// trainSummary is the training record stored under the model's "training"
// metadata key (read by inspect and tag --stats).
type trainSummary = train.Summary

func runTrain(a *app, f *trainFlags, args []string) error {
	if err := f.check(args); err != nil {
		return err
	}
	if err := checkOutput("train", f.output, append([]string{f.dev, f.vectors}, args...)...); err != nil {
		return err
	}
	ctx, stop := notifyInterrupt()
	defer stop()
	say := func(msg string) {
		if !f.quiet {
			fmt.Fprintf(a.stderr, "convtag: %s\n", msg)
		}
	}
	warn := func(msg string) { fmt.Fprintf(a.stderr, "convtag: warning: %s\n", msg) }
	ropt := f.options(a)
	// Empty arrays are records with no tag, kept unless single-label was
	// asked for; a single-label run drops them below, counted.
	ropt.EmptyTags = !f.multiSet || f.multi
	set, err := untilDone(ctx, func() (*stream.LabelledSet, error) { return readLabelled(a, args, ropt, "training") })
	if err != nil {
		return err
	}
	var dset *stream.LabelledSet
	var devFiles []string
	if f.dev != "" {
		devFiles = []string{f.dev}
		dset, err = untilDone(ctx, func() (*stream.LabelledSet, error) { return readLabelled(a, devFiles, ropt, "dev") })
		if err != nil {
			return err
		}
	}
	multi := f.multi
	if !f.multiSet && set.Arrays > 0 {
		multi = true
		fmt.Fprintf(a.stderr, "convtag: %d training records have an array of tags: training a multi-label model (one sigmoid per tag; --multi-label=false for one tag per record)\n", set.Arrays)
	}
	var dev []train.Record
	if !multi {
		for _, s := range []*stream.LabelledSet{set, dset} {
			if s == nil {
				continue
			}
			what := "training"
			if s == dset {
				what = "dev"
			}
			if s.Multi > 0 {
				fmt.Fprintf(a.stderr, "convtag: %d %s records have several labels; training uses the first of each\n", s.Multi, what)
			}
			if s.NoTags > 0 {
				fmt.Fprintf(a.stderr, "convtag: %d %s records have an empty array of tags and are left out\n", s.NoTags, what)
			}
		}
		set.Records = withTags(set.Records)
		if len(set.Records) == 0 {
			return withCode(exitFailure, fmt.Errorf("train: %w in %s", stream.ErrNoRecords, strings.Join(args, ", ")))
		}
		if dset != nil {
			dev = recipeRecords(withTags(dset.Records))
		}
	} else if dset != nil {
		dev = multiRecords(dset.Records)
	}
	r := f.r
	if f.vectors != "" {
		vf, err := stream.Open(f.vectors, nil)
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("train: %w", err))
		}
		r.Vectors, err = untilDone(ctx, func() (*vectors.Set, error) { return vectors.Read(vf) })
		vf.Close()
		if errors.Is(err, errInterrupted) {
			return err
		}
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("train: %s: %w", f.vectors, err))
		}
		if f.dimSet && r.Dim != r.Vectors.Dim {
			return usageErr("leave out --vector-size to use the vectors' size", "train: --vector-size %d but %s has %d-dimensional vectors", r.Dim, f.vectors, r.Vectors.Dim)
		}
		r.Dim, r.VectorsName = r.Vectors.Dim, filepath.Base(f.vectors)
	}
	// The vectors may have changed the embedding size.
	if err := r.Check(); err != nil {
		return usageErr("convtag train --help (the recipe's flags)", "train: %w", err)
	}
	var bar *progressbar.ProgressBar
	prog := train.Progress{Warn: warn, Info: say,
		Batch: func(done, total int) {
			if bar == nil {
				bar = newTrainBar(a, f.quiet, total)
			}
			if bar != nil {
				bar.Set(done)
			}
		},
		Epoch: func(e train.EpochStats) {
			if bar != nil {
				bar.Reset()
				bar.Clear()
			}
			el := time.Duration(e.Elapsed * float64(time.Second))
			left := time.Duration(float64(el) / float64(e.Epoch) * float64(r.Epochs-e.Epoch))
			if multi {
				say(fmt.Sprintf("epoch %d/%d  loss %.4f  train exact %.4f  dev loss %.4f  dev micro-F1 %.4f  macro-F1 %.4f (at 0.5)  %s tokens/s  elapsed %s  left <= %s",
					e.Epoch, r.Epochs, e.Loss, e.TrainAcc, e.DevLoss, e.DevMicroF1, e.DevMacroF1, humanRate(float64(e.Tokens)/e.Seconds),
					el.Round(time.Second), left.Round(time.Second)))
				return
			}
			say(fmt.Sprintf("epoch %d/%d  loss %.4f  train %.4f  dev %.4f  dev macro-F1 %.4f  %s tokens/s  elapsed %s  left <= %s",
				e.Epoch, r.Epochs, e.Loss, e.TrainAcc, e.DevAcc, e.DevMacroF1, humanRate(float64(e.Tokens)/e.Seconds),
				el.Round(time.Second), left.Round(time.Second)))
		},
	}
	var m *model.Model
	var sum *train.Summary
	if multi {
		m, sum, err = r.FitMulti(ctx, multiRecords(set.Records), dev, prog)
	} else {
		m, sum, err = r.Fit(ctx, recipeRecords(set.Records), dev, prog)
	}
	if bar != nil {
		bar.Finish()
	}
	var few *train.FewLabelsError
	switch {
	case errors.Is(err, train.ErrStopped):
		return withCode(exitFailure, errInterrupted)
	case errors.As(err, &few):
		return withCode(exitFailure, fmt.Errorf("train: %s: %w", strings.Join(args, ", "), err))
	case err != nil:
		return withCode(exitFailure, fmt.Errorf("train: %w", err))
	}
	// Said even with -q: it is what the file holds, not progress.
	if multi {
		fmt.Fprintf(a.stderr, "convtag: baseline: one-vs-rest naive Bayes, scored on dev, not stored\n")
	} else {
		fmt.Fprintf(a.stderr, "convtag: baseline: naive Bayes, %s stored\n", humanBytes(len(m.Baseline)))
	}
	if r.Description == "" && r.IntendedUse == "" && r.NotFor == "" {
		fmt.Fprintln(a.stderr, "convtag: reminder: say what this model is for and not for (--description, --intended-use, --not-for); inspect shows them first")
	}
	sum.Files, sum.DevFiles = baseNames(args), baseNames(devFiles)
	sum.Records["skipped"], sum.Records["multi_label"] = set.Skipped, set.Multi
	if err := sum.Store(m); err != nil {
		return withCode(exitFailure, err)
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
	net, bs := sum.Network, sum.Baseline
	if multi {
		printMultiSummary(w, sum)
	} else if sum.Records["dev"] > 0 {
		fmt.Fprintf(w, "dev accuracy: network %.4f (macro-F1 %.4f, epoch %d of %d)   naive Bayes %.4f (macro-F1 %.4f)\n",
			net.DevAccuracy, net.DevMacroF1, sum.BestEpoch, sum.EpochsRun, bs.DevAccuracy, bs.DevMacroF1)
		if bs.DevAccuracy > net.DevAccuracy {
			fmt.Fprintf(w, "the baseline beats the network on these dev records\n")
		}
	}
	fmt.Fprintf(w, "wrote %s (%d labels, %d words, %.1fs)\n", f.output, len(m.Labels), sum.Vocabulary, sum.Seconds)
	return nil
}

// withTags returns the records that have a label (single-label training
// leaves out those with an empty array of tags).
func withTags(recs []stream.Labelled) []stream.Labelled {
	out := recs[:0:0]
	for _, r := range recs {
		if len(r.Labels) > 0 {
			out = append(out, r)
		}
	}
	return out
}

// multiRecords gives each record's text and all its tags.
func multiRecords(recs []stream.Labelled) []train.Record {
	out := make([]train.Record, len(recs))
	for i, r := range recs {
		out[i] = train.Record{Text: r.Text, Tags: r.Labels}
	}
	return out
}

// printMultiSummary prints a multi-label run's dev figures at the stored
// thresholds, the baseline's, and each tag's threshold.
func printMultiSummary(w io.Writer, sum *train.Summary) {
	net, bs := sum.Network, sum.Baseline
	if sum.Records["dev"] > 0 {
		fmt.Fprintf(w, "dev micro-F1: network %.4f (macro-F1 %.4f, exact sets %.4f, epoch %d of %d)   naive Bayes one-vs-rest %.4f (macro-F1 %.4f, exact sets %.4f)\n",
			net.DevMicroF1, net.DevMacroF1, net.DevAccuracy, sum.BestEpoch, sum.EpochsRun, bs.DevMicroF1, bs.DevMacroF1, bs.DevAccuracy)
		if bs.DevMicroF1 > net.DevMicroF1 {
			fmt.Fprintf(w, "the baseline beats the network on these dev records\n")
		}
	}
	fmt.Fprintf(w, "tag thresholds (%s on dev):", sum.Goal)
	for _, t := range sum.Thresholds {
		note := ""
		switch {
		case !t.Tuned:
			note = " (no dev record: default)"
		case sum.Goal != "f1" && !t.Reached:
			note = " (goal not reached)"
		}
		fmt.Fprintf(w, " %s=%s%s", t.Label, strconv.FormatFloat(t.Threshold, 'g', -1, 64), note)
	}
	fmt.Fprintln(w)
}

// recipeRecords gives each record's text and first label.
func recipeRecords(recs []stream.Labelled) []train.Record {
	out := make([]train.Record, len(recs))
	for i, r := range recs {
		out[i] = train.Record{Text: r.Text, Label: r.Labels[0]}
	}
	return out
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
