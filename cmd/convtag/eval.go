package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"maps"
	"math"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"convtag/model"
	"convtag/model/builtin"
	"convtag/model/metrics"
	"convtag/model/metrics/plots"
	"convtag/model/nb"
	"convtag/model/token"
	"convtag/model/train"
	"convtag/stream"
)

func init() { commands = append(commands, newEvalCmd) }

// baselineKind names the baseline in reports.
const baselineKind = "naive Bayes"

type evalFlags struct {
	model, plots, plotFormat, baselineTrain string
	labelledFlags
	asJSON, noBaseline, conservative bool
	target                           float64
	folds                            int
	train                            trainFlags     // for --folds
	recipeFlags                      *pflag.FlagSet // train's recipe flags, which only apply with --folds
}

func newEvalCmd(a *app) *cobra.Command {
	f := evalFlags{train: trainFlags{r: train.Defaults()}}
	c := &cobra.Command{
		Use:   "eval [-m MODEL] [flags] FILE...",
		Short: "Evaluate a model on labelled records",
		Long: `eval scores a model on labelled records (read as train reads them: the same
--text-key, --label-key and --format, plain or compressed) and prints how
good it is: accuracy, macro-F1, precision, recall and F1 per label, the
confusion matrix, calibration (expected calibration error over 10 equal-width
confidence bins and the reliability table) and, for thresholds from 0.50 to
0.99, what share of records keeps its tag and how precise the kept tags are.
The same figures are given for the naive-Bayes baseline that train stores in
the model file (or one fitted on --baseline-train FILE).

Every precision and recall at a threshold comes with its 95% Wilson score
interval and the count of records it rests on, marked * below 30 records.
On few records precision can fall as the threshold rises (one confident
mistake among few kept records).

--target-precision P finds the lowest confidence threshold at which the tags
kept reach precision P on these records and every higher threshold does
too, so "at least that threshold" keeps the promise; pass it to tag
--min-confidence. With --conservative, the lower end of that threshold's
95% interval must reach P as well.
--plots DIR draws the confusion matrix, the reliability diagram, the
precision-recall curves and the learning curve of the model's training.

--folds K instead trains K networks and baselines by stratified K-fold
cross-validation on the FILEs and reports each fold and the mean ± standard
deviation. It takes train's recipe flags, with train's names, defaults and
meaning (--epochs, --seed, --vector-size and the others below that train
lists); they apply only with --folds.

Records whose label the model does not know are counted and left out of the
figures. Records with several labels are scored on the first.

On a multi-label model (train --multi-label) each tag is judged on its
own at the tag threshold stored in the model: micro- and macro-averaged
precision, recall and F1, the share of records whose whole tag set is
right, the Hamming loss (share of record-tag pairs wrong), a per-tag table
with support and average precision, per-tag threshold tables, and with
--target-precision the lowest threshold per tag (tag --min-confidence
TAG=P, or --thresholds FILE). --baseline-train FILE fits a one-vs-rest
naive-Bayes baseline; --json adds each tag's precision-recall curve.

` + exitHelp,
		Example: `  convtag eval -m ferry.safetensors testdata/demo/dev.jsonl
  convtag eval -m ferry.safetensors --target-precision 0.95 --plots plots/ dev.jsonl
  convtag eval -m ferry.safetensors --json dev.jsonl | jq .macro_f1
  convtag eval -m desks.safetensors --target-precision 0.9 --baseline-train testdata/demo/multi-train.jsonl testdata/demo/multi-dev.jsonl
  convtag eval --folds 10 --epochs 10 --format label-tab-text sentences.txt`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			f.train.dimSet = cmd.Flags().Changed("vector-size")
			f.noteChanged(cmd.Flags())
			if err := f.check(cmd, args); err != nil {
				return err
			}
			if f.folds > 0 {
				return runFolds(a, &f, args)
			}
			return runEval(a, &f, args)
		},
	}
	fl := c.Flags()
	fl.StringVarP(&f.model, "model", "m", "", "model file (default: the built-in model)")
	f.labelledFlags.add(fl)
	fl.BoolVar(&f.asJSON, "json", false, "print the figures as one JSON object")
	fl.Float64Var(&f.target, "target-precision", 0, "find the lowest confidence threshold whose kept tags reach this precision, as does every higher one")
	fl.BoolVar(&f.conservative, "conservative", false, "with --target-precision: the lower end of precision's 95% interval must reach it")
	fl.StringVar(&f.plots, "plots", "", "write the figures as images into this directory")
	fl.StringVar(&f.plotFormat, "plot-format", "png", "image format of --plots: png or svg")
	fl.StringVar(&f.baselineTrain, "baseline-train", "", "fit the naive-Bayes baseline on these labelled records instead of using the stored one")
	fl.BoolVar(&f.noBaseline, "no-baseline", false, "leave out the baseline")
	fl.IntVar(&f.folds, "folds", 0, "cross-validate training itself with this many stratified folds (needs no model)")
	f.recipeFlags = f.train.r.FlagSet()
	fl.AddFlagSet(f.recipeFlags)
	return c
}

func (f *evalFlags) check(cmd *cobra.Command, args []string) error {
	if len(args) == 0 {
		return usageErr("convtag eval -m MODEL FILE...", "eval: no labelled input files")
	}
	if err := f.labelledFlags.check("eval"); err != nil {
		return err
	}
	if f.conservative && f.target == 0 {
		return usageErr("--target-precision 0.9 --conservative", "eval: --conservative needs --target-precision")
	}
	if f.target != 0 && !(f.target > 0 && f.target <= 1) {
		return usageErr("--target-precision 0.9", "eval: --target-precision %v is not in (0, 1]", f.target)
	}
	if f.plotFormat != "png" && f.plotFormat != "svg" {
		return usageErr("--plot-format png or --plot-format svg", "eval: unknown --plot-format %q", f.plotFormat)
	}
	if f.folds == 0 {
		var set []string
		f.recipeFlags.VisitAll(func(fl *pflag.Flag) {
			if fl.Changed {
				set = append(set, "--"+fl.Name)
			}
		})
		if len(set) > 0 {
			return usageErr("convtag eval --folds 10 "+strings.Join(set, " ")+" FILE", "eval: %s only apply with --folds", strings.Join(set, ", "))
		}
		return nil
	}
	switch {
	case f.folds < 2:
		return usageErr("--folds 10", "eval: --folds %d: need at least 2", f.folds)
	case f.model != "":
		return usageErr("convtag eval --folds 10 FILE", "eval: --folds trains its own models; leave out -m")
	case f.baselineTrain != "" || f.plots != "" || f.target != 0:
		return usageErr("convtag eval --folds 10 FILE", "eval: --baseline-train, --plots and --target-precision do not apply with --folds")
	}
	if err := f.train.r.Check(); err != nil {
		return usageErr("convtag eval --help (the recipe's flags)", "eval: %w", err)
	}
	t := f.train
	t.output, t.format = "-", stream.LabelledJSONL
	if err := t.check(args); err != nil {
		return err
	}
	return nil
}

// labelled reads labelled records for eval and reports the skipped ones,
// each problem on a line of its own with file and line, then the count.
func (f *evalFlags) labelled(a *app, files []string) (*stream.LabelledSet, error) {
	set, err := stream.ReadLabelled(files, f.options(a))
	if set != nil {
		for _, p := range set.Problems {
			fmt.Fprintf(a.stderr, "convtag: %s\n", p)
		}
		if set.Skipped > 0 {
			fmt.Fprintf(a.stderr, "convtag: %d records skipped (no text, no label or malformed)\n", set.Skipped)
		}
		if set.Multi > 0 {
			fmt.Fprintf(a.stderr, "convtag: %d records have several labels; each is scored on its first\n", set.Multi)
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
		return nil, withCode(exitFailure, fmt.Errorf("eval: %w", err))
	}
	return set, nil
}

// scored is a labelled set mapped onto a model's labels.
type scored struct {
	texts   []string
	gold    []int
	pos     []string       // each scored record's FILE:LINE, for errors
	unknown map[string]int // records whose label the model lacks, by label
}

func mapLabels(set *stream.LabelledSet, labels []string) scored {
	li := make(map[string]int, len(labels))
	for i, l := range labels {
		li[l] = i
	}
	s := scored{unknown: map[string]int{}}
	for _, r := range set.Records {
		g, ok := li[r.Labels[0]]
		if !ok {
			s.unknown[r.Labels[0]]++
			continue
		}
		s.texts = append(s.texts, r.Text)
		s.gold = append(s.gold, g)
		s.pos = append(s.pos, r.File+":"+strconv.FormatInt(r.Line, 10))
	}
	return s
}

func unknownString(u map[string]int) string {
	keys := slices.Sorted(mapKeys(u))
	return cappedList(len(keys), func(i int) string { return fmt.Sprintf("%s %d", quoteCapped(keys[i]), u[keys[i]]) })
}

// Caps on what an error or warning line quotes of the user's values, so
// that a model with 400,000 labels or a 1 MB label still gives a line of
// a few hundred bytes: at most listCap values and, after the first,
// listBytes bytes of them, each value cut after valueCap bytes.
const (
	listCap   = 8
	listBytes = 400
	valueCap  = 200
)

// quoteCapped quotes s, cut after valueCap bytes (at a rune boundary) and
// marked "…" when cut.
func quoteCapped(s string) string {
	if len(s) <= valueCap {
		return strconv.Quote(s)
	}
	cut := valueCap
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return strconv.Quote(s[:cut]) + "…"
}

// labelList is labels quoted and joined, at most listCap of them, with
// "and N more" after.
func labelList(labels []string) string {
	return cappedList(len(labels), func(i int) string { return quoteCapped(labels[i]) })
}

// cappedList joins item(0), item(1), ... of n items within listCap and
// listBytes, with "and N more" for those left out.
func cappedList(n int, item func(int) string) string {
	var b strings.Builder
	i := 0
	for ; i < n && i < listCap; i++ {
		s := item(i)
		if i > 0 && b.Len()+len(s) > listBytes {
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(s)
	}
	if i < n {
		fmt.Fprintf(&b, " and %d more", n-i)
	}
	return b.String()
}

// firstNonFinite returns the index of the first NaN or infinite value of
// probs, or -1.
func firstNonFinite(probs []float32) int {
	for j, v := range probs {
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return j
		}
	}
	return -1
}

// nonFiniteErr is the error for a classifier (what: "model" or
// "baseline") whose probabilities for the record at pos are not all
// finite: the metrics would be meaningless, so eval refuses the model.
func nonFiniteErr(what, name, pos string, labels []string, probs []float32, j int) error {
	return &exitError{code: exitUsage,
		err: fmt.Errorf("eval: %s: %s gives a non-finite probability for %s (%v for label %s)",
			name, what, pos, probs[j], quoteCapped(labels[j])),
		hint: "convtag inspect --verify " + name}
}

func mapKeys[V any](m map[string]V) func(func(string) bool) {
	return func(yield func(string) bool) {
		for k := range m {
			if !yield(k) {
				return
			}
		}
	}
}

// baselineProbs are the baseline's posterior probabilities: the softmax of
// its log scores.
func baselineProbs(b *nb.Model, tokens []string) []float32 {
	s := b.Scores(tokens)
	mx := math.Inf(-1)
	for _, v := range s {
		mx = max(mx, v)
	}
	var sum float64
	for i, v := range s {
		s[i] = math.Exp(v - mx)
		sum += s[i]
	}
	out := make([]float32, len(s))
	for i, v := range s {
		out[i] = float32(v / sum)
	}
	return out
}

// tokenStrings cuts text with tok into strings, as train cuts the
// baseline's input.
func tokenStrings(tok *token.Tokenizer, ts *token.Tokens, text string) []string {
	tok.Tokenize(ts, []byte(text))
	out := make([]string, ts.Len())
	for i := range out {
		out[i] = string(ts.At(i))
	}
	return out
}

// evalOutput is eval's JSON: the network's figures at the top level.
type evalOutput struct {
	Model   string   `json:"model"`
	Files   []string `json:"files"`
	Skipped int      `json:"skipped"`
	// UnknownLabels counts the records left out because the model does
	// not know their label.
	UnknownLabels map[string]int `json:"unknown_labels,omitempty"`
	*metrics.Report
	Baseline *baselineOutput `json:"baseline,omitempty"`
	Plots    []string        `json:"plots,omitempty"`
}

type baselineOutput struct {
	Kind   string `json:"kind"`
	Source string `json:"source"` // "stored" or the --baseline-train files
	*metrics.Report
}

func runEval(a *app, f *evalFlags, args []string) error {
	m, err := a.loadModel(f.model)
	if err != nil {
		return err
	}
	defer m.Close()
	name := f.model
	if name == "" {
		name = builtin.Name
	}
	if m.Multi {
		return runEvalMulti(a, f, args, m, name)
	}
	set, err := f.labelled(a, args)
	if err != nil {
		return err
	}
	s := mapLabels(set, m.Labels)
	if len(s.unknown) > 0 {
		fmt.Fprintf(a.stderr, "convtag: warning: %d records have labels %s does not know and are not scored: %s\n",
			len(set.Records)-len(s.gold), name, unknownString(s.unknown))
	}
	if len(s.gold) == 0 {
		return withCode(exitFailure, fmt.Errorf("eval: %s: no record has a label of %s (%s)", strings.Join(args, ", "), name, labelList(m.Labels)))
	}
	if inTrain, inDev, ok := train.CountSeen(m.Meta[train.MetaSeen], m.Tokenizer(), s.texts); ok && inTrain+inDev > 0 {
		fmt.Fprintf(a.stderr, "convtag: caution: %d of these %d records were among %s's training records and %d among its dev records (used to pick the epoch): the figures are optimistic; evaluate on records held out from training\n",
			inTrain, len(s.texts), name, inDev)
	}
	opt := metrics.Options{TargetPrecision: f.target, Conservative: f.conservative}
	p := m.NewPredictor()
	probs := make([][]float32, len(s.texts))
	for i, t := range s.texts {
		probs[i] = slices.Clone(p.Predict([]byte(t)))
		if j := firstNonFinite(probs[i]); j >= 0 {
			return nonFiniteErr("model", name, s.pos[i], m.Labels, probs[i], j)
		}
	}
	rep, err := metrics.Evaluate(m.Labels, s.gold, probs, opt)
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("eval: %w", err))
	}
	out := evalOutput{Model: name, Files: args, Skipped: set.Skipped, UnknownLabels: s.unknown, Report: rep}
	if len(out.UnknownLabels) == 0 {
		out.UnknownLabels = nil
	}

	var bprobs [][]float32
	if !f.noBaseline {
		base, source, err := f.baseline(a, m)
		if err != nil {
			return err
		}
		if base != nil {
			tok := m.Tokenizer()
			var ts token.Tokens
			bprobs = make([][]float32, len(s.texts))
			for i, t := range s.texts {
				bprobs[i] = baselineProbs(base, tokenStrings(tok, &ts, t))
				if j := firstNonFinite(bprobs[i]); j >= 0 {
					return nonFiniteErr("baseline ("+source+")", name, s.pos[i], m.Labels, bprobs[i], j)
				}
			}
			br, err := metrics.Evaluate(m.Labels, s.gold, bprobs, opt)
			if err != nil {
				return withCode(exitFailure, fmt.Errorf("eval: baseline: %w", err))
			}
			out.Baseline = &baselineOutput{Kind: baselineKind, Source: source, Report: br}
		}
	}

	if f.plots != "" {
		ps := plots.Set{Title: filepath.Base(name), Report: rep}
		for c, l := range m.Labels {
			pts, ap, err := metrics.PRCurve(s.gold, probs, c)
			if err != nil {
				return withCode(exitFailure, fmt.Errorf("eval: %w", err))
			}
			ps.Curves = append(ps.Curves, plots.Curve{Label: l, Points: pts, AveragePrecision: ap})
		}
		if sum, ok := m.Meta[model.MetaTraining]; ok {
			if h, err := plots.ParseHistory([]byte(sum)); err == nil {
				h.BaselineDevAcc = summaryBaselineAcc(sum)
				ps.History = h
			} else {
				fmt.Fprintf(a.stderr, "convtag: warning: no learning curve drawn: %v\n", err)
			}
		}
		files, err := plots.WriteAll(f.plots, f.plotFormat, ps)
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("eval: %w", err))
		}
		out.Plots = files
	}

	if f.asJSON {
		enc := json.NewEncoder(a.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(out)
	}
	return writeEvalText(a.stdout, &out, f.model)
}

// baseline returns the baseline to score: fitted on --baseline-train, or
// the one stored in the model file, or nil (with a note) when there is
// none.
func (f *evalFlags) baseline(a *app, m *model.Model) (*nb.Model, string, error) {
	if f.baselineTrain != "" {
		files := strings.Split(f.baselineTrain, ",")
		set, err := f.labelled(a, files)
		if err != nil {
			return nil, "", err
		}
		s := mapLabels(set, m.Labels)
		if len(s.gold) == 0 {
			// Fitted on nothing, every label's prior is log 0 and every
			// posterior 0/0: refuse instead of scoring NaN.
			return nil, "", withCode(exitFailure, fmt.Errorf("eval: --baseline-train %s: no record has a label of the model (%s)",
				strings.Join(files, ", "), labelList(m.Labels)))
		}
		if len(s.unknown) > 0 {
			fmt.Fprintf(a.stderr, "convtag: warning: %d baseline training records have labels the model does not know and are not used: %s\n",
				len(set.Records)-len(s.gold), unknownString(s.unknown))
		}
		tok := m.Tokenizer()
		var ts token.Tokens
		docs := make([][]string, len(s.texts))
		for i, t := range s.texts {
			docs[i] = tokenStrings(tok, &ts, t)
		}
		b, err := nb.Fit(docs, s.gold, len(m.Labels), 1)
		if err != nil {
			return nil, "", withCode(exitFailure, fmt.Errorf("eval: baseline: %w", err))
		}
		return b, "fitted on " + strings.Join(files, ", "), nil
	}
	enc := m.Baseline
	if len(enc) == 0 {
		fmt.Fprintf(a.stderr, "convtag: the model file holds no baseline; --baseline-train FILE fits one\n")
		return nil, "", nil
	}
	b, err := nb.Decode(enc)
	if err != nil {
		return nil, "", withCode(exitUsage, fmt.Errorf("eval: stored baseline: %w", err))
	}
	if b.Labels() != len(m.Labels) {
		return nil, "", withCode(exitUsage, fmt.Errorf("eval: stored baseline has %d labels, the model %d", b.Labels(), len(m.Labels)))
	}
	return b, "stored in the model file", nil
}

// summaryBaselineAcc is the baseline's dev accuracy in a training summary,
// or 0.
func summaryBaselineAcc(summary string) float64 {
	var s struct {
		Baseline struct {
			DevAccuracy float64 `json:"dev_accuracy"`
		} `json:"baseline"`
	}
	if json.Unmarshal([]byte(summary), &s) != nil {
		return 0
	}
	return s.Baseline.DevAccuracy
}

// table lays out rows of cells in columns, two spaces apart: the first
// left-aligned and the rest right-aligned, or every one left-aligned when
// left is set.
type table struct {
	rows   [][]string
	indent string
	left   bool
}

func (t *table) add(cells ...string) { t.rows = append(t.rows, cells) }

func (t *table) write(b *strings.Builder) {
	var w []int
	for _, r := range t.rows {
		for i, c := range r {
			if i >= len(w) {
				w = append(w, 0)
			}
			w[i] = max(w[i], len([]rune(c)))
		}
	}
	for _, r := range t.rows {
		line := t.indent
		for i, c := range r {
			pad := strings.Repeat(" ", w[i]-len([]rune(c)))
			switch {
			case i == 0:
				line += c + pad
			case t.left:
				line += "  " + c + pad
			default:
				line += "  " + pad + c
			}
		}
		b.WriteString(strings.TrimRight(line, " "))
		b.WriteByte('\n')
	}
}

func f3(x float64) string { return strconv.FormatFloat(x, 'f', 3, 64) }
func f4(x float64) string { return strconv.FormatFloat(x, 'f', 4, 64) }

func frac(x metrics.Fraction) string {
	if !x.Defined() {
		return "-"
	}
	return f3(float64(x))
}

func pct(x metrics.Fraction) string {
	if !x.Defined() {
		return "-"
	}
	return strconv.FormatFloat(100*float64(x), 'f', 1, 64) + "%"
}

func itoa(n int) string { return strconv.Itoa(n) }

// Caution limits (rules of thumb, common practice rather than a standard):
// a label with fewer than metrics.FewRecords records, a precision whose 95%
// interval is wider than wideInterval, and labels whose recalls are more
// than recallGap apart.
const (
	wideInterval = 0.25
	recallGap    = 0.20
)

// cautions are the short warnings eval prints under the network's
// per-label table: figures resting on few records, and a model that fails
// some labels' records much more often than others'.
func cautions(r *metrics.Report) []string {
	var out, few, wide []string
	for i, s := range r.PerLabel {
		if s.Support < metrics.FewRecords {
			few = append(few, fmt.Sprintf("%s (%d)", s.Label, s.Support))
		}
		tp := r.Confusion[i][i]
		if ci := metrics.Wilson(tp, s.Predicted); ci.Low.Defined() && float64(ci.High-ci.Low) > wideInterval {
			wide = append(wide, fmt.Sprintf("%s %s", s.Label, interval(ci)))
		}
	}
	if len(few) > 0 {
		out = append(out, "fewer than 30 records of "+capList(few)+": their figures move by more than 3 points per record")
	}
	if len(wide) > 0 {
		out = append(out, "precision is uncertain (95% interval wider than 0.25) for "+capList(wide))
	}
	lo, hi := 0, 0
	for i, s := range r.PerLabel {
		if s.Support == 0 {
			continue
		}
		if r.PerLabel[lo].Support == 0 || s.Recall < r.PerLabel[lo].Recall {
			lo = i
		}
		if r.PerLabel[hi].Support == 0 || s.Recall > r.PerLabel[hi].Recall {
			hi = i
		}
	}
	if g := r.PerLabel[hi].Recall - r.PerLabel[lo].Recall; g > recallGap {
		out = append(out, fmt.Sprintf("recall ranges from %s (%s) to %s (%s): the model misses some kinds of record far more often than others; check those before acting on their tags",
			f3(r.PerLabel[lo].Recall), r.PerLabel[lo].Label, f3(r.PerLabel[hi].Recall), r.PerLabel[hi].Label))
	}
	return out
}

// capList joins items with commas, at most 8 of them.
func capList(items []string) string {
	if len(items) > 8 {
		return strings.Join(items[:8], ", ") + fmt.Sprintf(" and %d more", len(items)-8)
	}
	return strings.Join(items, ", ")
}

// interval writes a 95% interval as [low,high] with two decimals.
func interval(ci metrics.Interval) string {
	if !ci.Low.Defined() || !ci.High.Defined() {
		return "-"
	}
	return "[" + strconv.FormatFloat(float64(ci.Low), 'f', 2, 64) + "," + strconv.FormatFloat(float64(ci.High), 'f', 2, 64) + "]"
}

// few marks a count under metrics.FewRecords.
func few(b bool) string {
	if b {
		return "*"
	}
	return ""
}

func fewWord(b bool) string {
	if b {
		return " (fewer than 30: read it with its interval)"
	}
	return ""
}

func anyFew(t metrics.Thresholds) bool {
	for _, r := range t.Overall {
		if r.Few && r.Kept > 0 {
			return true
		}
	}
	for _, l := range t.PerLabel {
		for _, r := range l.Rows {
			if r.Few && r.Kept > 0 || r.Relevant < metrics.FewRecords {
				return true
			}
		}
	}
	return false
}

func writeEvalText(w io.Writer, o *evalOutput, modelFlag string) error {
	var b strings.Builder
	r := o.Report
	fmt.Fprintf(&b, "model:    %s (%d labels)\n", o.Model, len(r.Labels))
	fmt.Fprintf(&b, "records:  %d scored from %s", r.Records, strings.Join(o.Files, ", "))
	var notes []string
	if o.Skipped > 0 {
		notes = append(notes, itoa(o.Skipped)+" skipped")
	}
	if n := sumCounts(o.UnknownLabels); n > 0 {
		notes = append(notes, itoa(n)+" with labels the model lacks")
	}
	if len(notes) > 0 {
		fmt.Fprintf(&b, " (%s)", strings.Join(notes, ", "))
	}
	b.WriteString("\n")
	if o.Baseline != nil {
		fmt.Fprintf(&b, "baseline: %s, %s\n", o.Baseline.Kind, o.Baseline.Source)
	}
	b.WriteString("\n")

	sum := table{}
	head := []string{"", "network"}
	if o.Baseline != nil {
		head = append(head, baselineKind)
	}
	sum.add(head...)
	row := func(name string, get func(*metrics.Report) string) {
		cells := []string{name, get(r)}
		if o.Baseline != nil {
			cells = append(cells, get(o.Baseline.Report))
		}
		sum.add(cells...)
	}
	row("accuracy", func(x *metrics.Report) string { return f4(x.Accuracy) })
	row("macro-F1", func(x *metrics.Report) string { return f4(x.MacroF1) })
	row("ECE (10 bins)", func(x *metrics.Report) string { return f4(x.Calibration.ECE) })
	row("largest bin gap", func(x *metrics.Report) string { return f4(x.Calibration.MCE) })
	sum.write(&b)

	perLabel := func(title string, x *metrics.Report) {
		fmt.Fprintf(&b, "\n%s\n", title)
		t := table{indent: "  "}
		t.add("label", "precision", "recall", "F1", "support", "predicted", "avg precision")
		for _, s := range x.PerLabel {
			t.add(s.Label, f3(s.Precision), f3(s.Recall), f3(s.F1), itoa(s.Support), itoa(s.Predicted), frac(s.AveragePrecision))
		}
		t.write(&b)
	}
	confusion := func(title string, x *metrics.Report) {
		fmt.Fprintf(&b, "\n%s (rows: true label, columns: predicted)\n", title)
		t := table{indent: "  "}
		t.add(append([]string{"true \\ predicted"}, x.Labels...)...)
		for i, l := range x.Labels {
			cells := []string{l}
			for _, n := range x.Confusion[i] {
				cells = append(cells, itoa(n))
			}
			t.add(cells...)
		}
		t.write(&b)
	}
	perLabel("per label, network", r)
	for _, c := range cautions(r) {
		fmt.Fprintf(&b, "  caution: %s\n", c)
	}
	confusion("confusion, network", r)
	if o.Baseline != nil {
		perLabel("per label, "+baselineKind, o.Baseline.Report)
		confusion("confusion, "+baselineKind, o.Baseline.Report)
	}

	fmt.Fprintf(&b, "\ncalibration, network: ECE %s over %d equal-width bins of the top label's probability\n", f4(r.Calibration.ECE), len(r.Calibration.Bins))
	ct := table{indent: "  "}
	ct.add("confidence", "records", "mean confidence", "accuracy", "gap")
	for _, bin := range r.Calibration.Bins {
		gap := "-"
		if bin.Count > 0 {
			gap = strconv.FormatFloat(float64(bin.Accuracy)-float64(bin.Confidence), 'f', 3, 64)
			if !strings.HasPrefix(gap, "-") {
				gap = "+" + gap
			}
		}
		ct.add(fmt.Sprintf("(%.1f, %.1f]", bin.Lo, bin.Hi), itoa(bin.Count), frac(bin.Confidence), frac(bin.Accuracy), gap)
	}
	ct.write(&b)

	b.WriteString("\nthresholds, network: below the threshold a record is tagged unsure (tag --min-confidence)\n")
	ot := table{indent: "  "}
	ot.add("threshold", "tagged", "records", "precision", "95% interval", "recall", "95% interval")
	for _, t := range r.Thresholds.Overall {
		ot.add(strconv.FormatFloat(t.Threshold, 'f', 2, 64), pct(t.Coverage), itoa(t.Kept)+few(t.Few),
			frac(t.Precision), interval(t.PrecisionCI), frac(t.Recall), interval(t.RecallCI))
	}
	ot.write(&b)
	for _, what := range []struct {
		name string
		get  func(metrics.ThresholdRow) string
	}{
		{"precision [95% interval] over the records kept (* fewer than 30)", func(t metrics.ThresholdRow) string {
			if t.Kept == 0 {
				return "-"
			}
			return frac(t.Precision) + " " + interval(t.PrecisionCI) + " " + itoa(t.Kept) + few(t.Few)
		}},
		{"recall [95% interval] over the label's records", func(t metrics.ThresholdRow) string {
			return frac(t.Recall) + " " + interval(t.RecallCI) + " " + itoa(t.Relevant) + few(t.Relevant < metrics.FewRecords)
		}},
		{"coverage (share of the label's tags kept)", func(t metrics.ThresholdRow) string { return frac(t.Coverage) }},
	} {
		fmt.Fprintf(&b, "\n  per label, %s\n", what.name)
		t := table{indent: "  "}
		t.add(append([]string{"threshold"}, r.Labels...)...)
		for i, lv := range metrics.Levels {
			cells := []string{strconv.FormatFloat(lv, 'f', 2, 64)}
			for _, lt := range r.Thresholds.PerLabel {
				cells = append(cells, what.get(lt.Rows[i]))
			}
			t.add(cells...)
		}
		t.write(&b)
	}
	if anyFew(r.Thresholds) {
		b.WriteString("  * fewer than 30 records: one record moves the figure by more than 3 points; read it with its interval\n")
	}

	if tg := r.Target; tg != nil {
		how := "every higher threshold reaching it too"
		if tg.Conservative {
			how += "; the threshold's 95% interval above it (--conservative)"
		}
		fmt.Fprintf(&b, "\ntarget precision %s (%s)\n", strconv.FormatFloat(tg.Precision, 'f', -1, 64), how)
		op := tg.Overall
		if op.Reached {
			fmt.Fprintf(&b, "  all labels: lowest threshold %s: precision %s %s over %d records%s, recall %s, %s of records tagged\n",
				strconv.FormatFloat(op.Threshold, 'f', -1, 64), frac(op.Precision), interval(op.PrecisionCI), op.Kept, fewWord(op.Few), frac(op.Recall), pct(op.Coverage))
			m := ""
			if modelFlag != "" {
				m = " -m " + modelFlag
			}
			fmt.Fprintf(&b, "  try: convtag tag%s --min-confidence %s\n", m, strconv.FormatFloat(op.Threshold, 'f', -1, 64))
		} else {
			fmt.Fprintf(&b, "  all labels: not reached on these records; the best is precision %s at threshold %s (recall %s)\n",
				frac(op.Precision), strconv.FormatFloat(op.Threshold, 'f', -1, 64), frac(op.Recall))
		}
		t := table{indent: "  "}
		t.add("label", "threshold", "precision", "95% interval", "records", "recall", "tags kept")
		for _, l := range tg.PerLabel {
			thr := strconv.FormatFloat(l.Threshold, 'f', -1, 64)
			if !l.Reached {
				thr = "not reached"
				if l.Kept > 0 {
					thr += ", best " + frac(l.Precision) + " at " + strconv.FormatFloat(l.Threshold, 'f', -1, 64)
				}
			}
			t.add(l.Label, thr, frac(l.Precision), interval(l.PrecisionCI), itoa(l.Kept)+few(l.Few), frac(l.Recall), pct(l.Coverage))
		}
		t.write(&b)
		var per []string
		for _, l := range tg.PerLabel {
			if l.Reached {
				per = append(per, l.Label+"="+strconv.FormatFloat(l.Threshold, 'f', -1, 64))
			} else {
				per = append(per, l.Label+"=1")
			}
		}
		m := ""
		if modelFlag != "" {
			m = " -m " + modelFlag
		}
		fmt.Fprintf(&b, "  per label: convtag tag%s --min-confidence %s\n", m, strings.Join(per, ","))
		fmt.Fprintf(&b, "  (or save this report with --json and give it to tag --thresholds FILE; a label not reached is then always tagged unsure)\n")
	}
	if len(o.Plots) > 0 {
		fmt.Fprintf(&b, "\nplots: %s\n", strings.Join(o.Plots, " "))
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func sumCounts(m map[string]int) int {
	n := 0
	for _, v := range m {
		n += v
	}
	return n
}

// foldResult is one fold's figures.
type foldResult struct {
	Fold     int     `json:"fold"`
	Train    int     `json:"train"`
	Dev      int     `json:"dev"`
	Test     int     `json:"test"`
	Epochs   int     `json:"best_epoch"`
	NetAcc   float64 `json:"network_accuracy"`
	NetF1    float64 `json:"network_macro_f1"`
	BaseAcc  float64 `json:"baseline_accuracy"`
	BaseF1   float64 `json:"baseline_macro_f1"`
	Duration float64 `json:"seconds"`
}

type foldsOutput struct {
	Files    []string       `json:"files"`
	Folds    int            `json:"folds"`
	Seed     uint64         `json:"seed"`
	Records  int            `json:"records"`
	Labels   []string       `json:"labels"`
	PerFold  []foldResult   `json:"per_fold"`
	Network  spreadAccF1    `json:"network"`
	Baseline spreadAccF1    `json:"baseline"`
	Options  map[string]any `json:"options"`
}

type spreadAccF1 struct {
	Accuracy metrics.Spread `json:"accuracy"`
	MacroF1  metrics.Spread `json:"macro_f1"`
}

// runFolds cross-validates training: for each of K stratified folds it
// trains a network (with an inner dev split of the other folds for early
// stopping) and the baseline (on the same inner training part, as train
// does) and scores both on the fold.
func runFolds(a *app, f *evalFlags, args []string) error {
	set, err := f.labelled(a, args)
	if err != nil {
		return err
	}
	r := f.train.r
	if r.Jobs == 0 {
		r.Jobs = runtime.GOMAXPROCS(0)
	}
	recs := recipeRecords(set.Records)
	counts := map[string]int{}
	for _, rec := range recs {
		counts[rec.Label]++
	}
	labels := slices.Sorted(maps.Keys(counts))
	if len(labels) < 2 {
		return withCode(exitFailure, fmt.Errorf("eval: %s: need at least 2 different labels, found %d", strings.Join(args, ", "), len(labels)))
	}
	if f.folds > len(recs) {
		return usageErr("", "eval: --folds %d but only %d records", f.folds, len(recs))
	}
	y := make([]int, len(recs))
	for i, rec := range recs {
		y[i], _ = slices.BinarySearch(labels, rec.Label)
	}
	for _, l := range labels {
		if n := counts[l]; n < f.folds {
			fmt.Fprintf(a.stderr, "convtag: warning: label %q has %d records, fewer than %d folds: some folds do not test it\n", l, n, f.folds)
		}
	}
	fold := train.StratifiedFolds(y, f.folds, r.Seed)
	out := foldsOutput{Files: args, Folds: f.folds, Seed: r.Seed, Records: len(recs), Labels: labels,
		Options: map[string]any{"vector_size": r.Dim, "widths": r.Widths, "filters": r.Filters, "hidden": r.Hidden, "epochs": r.Epochs,
			"patience": r.Patience, "batch": r.Batch, "optimizer": r.Optimizer, "learning_rate": r.LR, "min_seen": r.MinSeen,
			"max_words": r.MaxWords, "unseen_rows": r.Buckets, "class_weights": r.ClassWeights, "dev_fraction": r.DevFraction, "jobs": r.Jobs}}
	// Every fold's model has every label, so that each fold is scored on
	// the same classes; the network is scored on its direct path.
	r.Labels, r.NoFold = labels, true
	var na, nf, ba, bf []float64
	for k := range f.folds {
		var rest, test []int
		for i, fk := range fold {
			if fk == k {
				test = append(test, i)
			} else {
				rest = append(rest, i)
			}
		}
		fr, err := trainFold(r, recs, y, rest, test)
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("eval: fold %d: %w", k+1, err))
		}
		fr.Fold = k + 1
		out.PerFold = append(out.PerFold, fr)
		na, nf, ba, bf = append(na, fr.NetAcc), append(nf, fr.NetF1), append(ba, fr.BaseAcc), append(bf, fr.BaseF1)
		if !f.asJSON {
			fmt.Fprintf(a.stderr, "convtag: fold %d/%d: network %.4f (macro-F1 %.4f)  %s %.4f (macro-F1 %.4f)  %.1fs\n",
				k+1, f.folds, fr.NetAcc, fr.NetF1, baselineKind, fr.BaseAcc, fr.BaseF1, fr.Duration)
		}
	}
	out.Network = spreadAccF1{metrics.MeanStd(na), metrics.MeanStd(nf)}
	out.Baseline = spreadAccF1{metrics.MeanStd(ba), metrics.MeanStd(bf)}
	if f.asJSON {
		enc := json.NewEncoder(a.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(out)
	}
	return writeFoldsText(a.stdout, &out)
}

// trainFold runs the recipe on the records rest (it holds out its own dev
// split) and scores the network and the baseline on the records test; y
// are the records' label indices.
func trainFold(r train.Recipe, recs []train.Record, y []int, rest, test []int) (foldResult, error) {
	part := make([]train.Record, len(rest))
	for i, j := range rest {
		part[i] = recs[j]
	}
	m, sum, err := r.Fit(context.Background(), part, nil, train.Progress{})
	if err != nil {
		return foldResult{}, err
	}
	base, err := nb.Decode(m.Baseline)
	if err != nil {
		return foldResult{}, fmt.Errorf("baseline: %w", err)
	}
	p := m.NewPredictor()
	tok := m.Tokenizer()
	var ts token.Tokens
	var rows []int32
	gold, pred, bpred := make([]int, len(test)), make([]int, len(test)), make([]int, len(test))
	for i, j := range test {
		gold[i] = y[j]
		rows = m.AppendRows(rows[:0], &ts, []byte(recs[j].Text))
		pred[i], _ = metrics.Predict(p.PredictRows(rows))
		bpred[i] = base.Predict(tokenStrings(tok, &ts, recs[j].Text))
	}
	fr := foldResult{Train: sum.Records["train"], Dev: sum.Records["dev"], Test: len(test), Epochs: sum.BestEpoch, Duration: sum.Seconds}
	fr.NetAcc = metrics.Accuracy(gold, pred)
	fr.NetF1 = foldMacroF1(gold, pred, len(r.Labels))
	fr.BaseAcc = metrics.Accuracy(gold, bpred)
	fr.BaseF1 = foldMacroF1(gold, bpred, len(r.Labels))
	return fr, nil
}

func foldMacroF1(gold, pred []int, k int) float64 {
	return metrics.MacroF1(metrics.PerLabel(metrics.Confusion(gold, pred, k), nil))
}

func writeFoldsText(w io.Writer, o *foldsOutput) error {
	var b strings.Builder
	fmt.Fprintf(&b, "cross-validation: %d stratified folds (seed %d) of %d records from %s\n", o.Folds, o.Seed, o.Records, strings.Join(o.Files, ", "))
	fmt.Fprintf(&b, "labels: %s\n", strings.Join(o.Labels, ", "))
	fmt.Fprintf(&b, "each fold: network trained on the other folds less a %.0f%% dev split for early stopping, baseline on the same records\n\n", 100*o.Options["dev_fraction"].(float64))
	t := table{}
	t.add("fold", "train", "dev", "test", "best epoch", "network acc", "macro-F1", baselineKind+" acc", "macro-F1")
	for _, fr := range o.PerFold {
		t.add(itoa(fr.Fold), itoa(fr.Train), itoa(fr.Dev), itoa(fr.Test), itoa(fr.Epochs), f4(fr.NetAcc), f4(fr.NetF1), f4(fr.BaseAcc), f4(fr.BaseF1))
	}
	t.write(&b)
	b.WriteString("\nmean ± standard deviation over the folds (sample, n-1)\n")
	s := table{indent: "  "}
	s.add("", "accuracy", "macro-F1")
	s.add("network", o.Network.Accuracy.String(), o.Network.MacroF1.String())
	s.add(baselineKind, o.Baseline.Accuracy.String(), o.Baseline.MacroF1.String())
	s.write(&b)
	_, err := io.WriteString(w, b.String())
	return err
}
