package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"

	"convtag/model"
	"convtag/model/metrics"
	"convtag/model/nb"
	"convtag/model/token"
	"convtag/model/train"
	"convtag/stream"
)

// baselineKindMulti names the multi-label baseline in reports.
const baselineKindMulti = "naive Bayes one-vs-rest"

// evalMultiOutput is eval's JSON for a multi-label model.
type evalMultiOutput struct {
	Model   string   `json:"model"`
	Mode    string   `json:"mode"`
	Files   []string `json:"files"`
	Skipped int      `json:"skipped"`
	// UnknownTags counts the tags of records that the model lacks (left
	// out of the figures; the record is scored on its other tags).
	UnknownTags map[string]int `json:"unknown_tags,omitempty"`
	*metrics.MultiReport
	Baseline *baselineMultiOutput `json:"baseline,omitempty"`
}

type baselineMultiOutput struct {
	Kind   string `json:"kind"`
	Source string `json:"source"`
	*metrics.MultiReport
}

// multiSet is a labelled set as indicator rows of a model's labels.
type multiSet struct {
	texts   []string
	gold    [][]bool
	pos     []string
	unknown map[string]int
}

func mapTags(set *stream.LabelledSet, labels []string) multiSet {
	li := make(map[string]int, len(labels))
	for i, l := range labels {
		li[l] = i
	}
	s := multiSet{unknown: map[string]int{}}
	for _, r := range set.Records {
		row := make([]bool, len(labels))
		for _, l := range r.Labels {
			if c, ok := li[l]; ok {
				row[c] = true
			} else {
				s.unknown[l]++
			}
		}
		s.texts = append(s.texts, r.Text)
		s.gold = append(s.gold, row)
		s.pos = append(s.pos, r.File+":"+strconv.FormatInt(r.Line, 10))
	}
	return s
}

// labelledMulti reads eval's records for a multi-label model: an empty
// array of tags is a record with no tag.
func (f *evalFlags) labelledMulti(a *app, files []string) (*stream.LabelledSet, error) {
	opt := f.options(a)
	opt.EmptyTags = true
	set, err := stream.ReadLabelled(files, opt)
	if set != nil {
		for _, p := range set.Problems {
			fmt.Fprintf(a.stderr, "convtag: %s\n", p)
		}
		if set.Skipped > 0 {
			fmt.Fprintf(a.stderr, "convtag: %d records skipped (no text, no label or malformed)\n", set.Skipped)
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

func runEvalMulti(a *app, f *evalFlags, args []string, m *model.Model, name string) error {
	if f.plots != "" {
		return usageErr("convtag eval --json -m MODEL FILE (its pr_curves)", "eval: --plots is not drawn for a multi-label model yet; --json holds each tag's precision-recall curve")
	}
	set, err := f.labelledMulti(a, args)
	if err != nil {
		return err
	}
	s := mapTags(set, m.Labels)
	if len(s.unknown) > 0 {
		fmt.Fprintf(a.stderr, "convtag: warning: %s does not know the tags %s; the records are scored on their other tags\n", name, unknownString(s.unknown))
	}
	if inTrain, inDev, ok := train.CountSeen(m.Meta[train.MetaSeen], m.Tokenizer(), s.texts); ok && inTrain+inDev > 0 {
		fmt.Fprintf(a.stderr, "convtag: caution: %d of these %d records were among %s's training records and %d among its dev records (used to pick the epoch and the tag thresholds): the figures are optimistic; evaluate on records held out from training\n",
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
	rep, err := metrics.EvaluateMulti(m.Labels, s.gold, probs, m.Thresholds, opt)
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("eval: %w", err))
	}
	out := evalMultiOutput{Model: name, Mode: model.ModeMulti, Files: args, Skipped: set.Skipped, UnknownTags: s.unknown, MultiReport: rep}
	if len(out.UnknownTags) == 0 {
		out.UnknownTags = nil
	}
	if !f.noBaseline {
		if f.baselineTrain == "" {
			fmt.Fprintf(a.stderr, "convtag: a multi-label model file holds no baseline; --baseline-train FILE fits a one-vs-rest one\n")
		} else {
			files := strings.Split(f.baselineTrain, ",")
			bset, err := f.labelledMulti(a, files)
			if err != nil {
				return err
			}
			bs := mapTags(bset, m.Labels)
			br, err := oneVsRestBaseline(m, bs, s, opt)
			if err != nil {
				return withCode(exitFailure, fmt.Errorf("eval: baseline: %w", err))
			}
			out.Baseline = &baselineMultiOutput{Kind: baselineKindMulti, Source: "fitted on " + strings.Join(files, ", "), MultiReport: br}
		}
	}
	if f.asJSON {
		enc := json.NewEncoder(a.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(out)
	}
	return writeEvalMultiText(a.stdout, &out, f.model)
}

// oneVsRestBaseline fits one naive-Bayes classifier per tag (has it or
// not) on fit and scores test with it: a tag is given when its posterior
// is at least 0.5.
func oneVsRestBaseline(m *model.Model, fit, test multiSet, opt metrics.Options) (*metrics.MultiReport, error) {
	tok := m.Tokenizer()
	var ts token.Tokens
	docs := make([][]string, len(fit.texts))
	for i, t := range fit.texts {
		docs[i] = tokenStrings(tok, &ts, t)
	}
	tdocs := make([][]string, len(test.texts))
	for i, t := range test.texts {
		tdocs[i] = tokenStrings(tok, &ts, t)
	}
	probs := make([][]float32, len(test.texts))
	for i := range probs {
		probs[i] = make([]float32, len(m.Labels))
	}
	th := make([]float64, len(m.Labels))
	for c := range m.Labels {
		th[c] = 0.5
		ys := make([]int, len(docs))
		for i, g := range fit.gold {
			if g[c] {
				ys[i] = 1
			}
		}
		b, err := nb.Fit(docs, ys, 2, 1)
		if err != nil {
			return nil, err
		}
		for i, d := range tdocs {
			probs[i][c] = baselineProbs(b, d)[1]
		}
	}
	return metrics.EvaluateMulti(m.Labels, test.gold, probs, th, opt)
}

func writeEvalMultiText(w io.Writer, o *evalMultiOutput, modelFlag string) error {
	var b strings.Builder
	r := o.MultiReport
	fmt.Fprintf(&b, "model:    %s (multi-label, %d tags)\n", o.Model, len(r.Labels))
	fmt.Fprintf(&b, "records:  %d scored from %s", r.Records, strings.Join(o.Files, ", "))
	if o.Skipped > 0 {
		fmt.Fprintf(&b, " (%d skipped)", o.Skipped)
	}
	b.WriteString("\n")
	if o.Baseline != nil {
		fmt.Fprintf(&b, "baseline: %s, %s (each tag at 0.5)\n", o.Baseline.Kind, o.Baseline.Source)
	}
	b.WriteString("\nat the model's stored tag thresholds\n")
	sum := table{}
	head := []string{"", "network"}
	if o.Baseline != nil {
		head = append(head, baselineKindMulti)
	}
	sum.add(head...)
	row := func(name string, get func(*metrics.MultiReport) float64) {
		cells := []string{name, f4(get(r))}
		if o.Baseline != nil {
			cells = append(cells, f4(get(o.Baseline.MultiReport)))
		}
		sum.add(cells...)
	}
	row("micro precision", func(x *metrics.MultiReport) float64 { return x.Micro.Precision })
	row("micro recall", func(x *metrics.MultiReport) float64 { return x.Micro.Recall })
	row("micro-F1", func(x *metrics.MultiReport) float64 { return x.Micro.F1 })
	row("macro precision", func(x *metrics.MultiReport) float64 { return x.Macro.Precision })
	row("macro recall", func(x *metrics.MultiReport) float64 { return x.Macro.Recall })
	row("macro-F1", func(x *metrics.MultiReport) float64 { return x.Macro.F1 })
	row("exact tag sets", func(x *metrics.MultiReport) float64 { return x.SubsetAccuracy })
	row("Hamming loss", func(x *metrics.MultiReport) float64 { return x.HammingLoss })
	sum.write(&b)

	perLabel := func(title string, x *metrics.MultiReport) {
		fmt.Fprintf(&b, "\n%s\n", title)
		t := table{indent: "  "}
		t.add("tag", "threshold", "precision", "recall", "F1", "support", "predicted", "avg precision")
		for c, s := range x.PerLabel {
			t.add(s.Label, strconv.FormatFloat(x.Thresholds[c], 'f', -1, 64), f3(s.Precision), f3(s.Recall), f3(s.F1), itoa(s.Support), itoa(s.Predicted), frac(s.AveragePrecision))
		}
		t.write(&b)
	}
	perLabel("per tag, network", r)
	var fewTags []string
	for _, s := range r.PerLabel {
		if s.Support < metrics.FewRecords {
			fewTags = append(fewTags, fmt.Sprintf("%s (%d)", s.Label, s.Support))
		}
	}
	if len(fewTags) > 0 {
		fmt.Fprintf(&b, "  caution: fewer than 30 records of %s: their figures move by more than 3 points per record\n", capList(fewTags))
	}
	if o.Baseline != nil {
		perLabel("per tag, "+baselineKindMulti, o.Baseline.MultiReport)
	}

	b.WriteString("\nthresholds, network: each tag on its own (a record gets the tag when its probability is at least the threshold; tag --min-confidence TAG=P)\n")
	anyFewRow := false
	for _, what := range []struct {
		name string
		get  func(metrics.ThresholdRow) string
	}{
		{"precision [95% interval] over the records given the tag (* fewer than 30)", func(t metrics.ThresholdRow) string {
			if t.Kept == 0 {
				return "-"
			}
			if t.Few {
				anyFewRow = true
			}
			return frac(t.Precision) + " " + interval(t.PrecisionCI) + " " + itoa(t.Kept) + few(t.Few)
		}},
		{"recall [95% interval] over the tag's records", func(t metrics.ThresholdRow) string {
			if t.Relevant < metrics.FewRecords {
				anyFewRow = true
			}
			return frac(t.Recall) + " " + interval(t.RecallCI) + " " + itoa(t.Relevant) + few(t.Relevant < metrics.FewRecords)
		}},
	} {
		fmt.Fprintf(&b, "\n  per tag, %s\n", what.name)
		t := table{indent: "  "}
		t.add(append([]string{"threshold"}, r.Labels...)...)
		for i, lv := range metrics.Levels {
			cells := []string{strconv.FormatFloat(lv, 'f', 2, 64)}
			for _, lt := range r.Tables {
				cells = append(cells, what.get(lt.Rows[i]))
			}
			t.add(cells...)
		}
		t.write(&b)
	}
	if anyFewRow {
		b.WriteString("  * fewer than 30 records: one record moves the figure by more than 3 points; read it with its interval\n")
	}
	if tg := r.Target; tg != nil {
		how := "every higher threshold reaching it too"
		if tg.Conservative {
			how += "; the threshold's 95% interval above it (--conservative)"
		}
		fmt.Fprintf(&b, "\ntarget precision %s per tag (%s)\n", strconv.FormatFloat(tg.Precision, 'f', -1, 64), how)
		t := table{indent: "  "}
		t.add("tag", "threshold", "precision", "95% interval", "records", "recall")
		var per []string
		for _, l := range tg.PerLabel {
			thr := strconv.FormatFloat(l.Threshold, 'f', -1, 64)
			if l.Reached {
				per = append(per, l.Label+"="+thr)
			} else {
				per = append(per, l.Label+"=1")
				thr = "not reached"
				if l.Kept > 0 {
					thr += ", best " + frac(l.Precision) + " at " + strconv.FormatFloat(l.Threshold, 'f', -1, 64)
				}
			}
			t.add(l.Label, thr, frac(l.Precision), interval(l.PrecisionCI), itoa(l.Kept)+few(l.Few), frac(l.Recall))
		}
		t.write(&b)
		m := ""
		if modelFlag != "" {
			m = " -m " + modelFlag
		}
		fmt.Fprintf(&b, "  per tag: convtag tag%s --min-confidence %s\n", m, strings.Join(per, ","))
		fmt.Fprintf(&b, "  (or save this report with --json and give it to tag --thresholds FILE; a tag not reached is then never given)\n")
	}
	_, err := io.WriteString(w, b.String())
	return err
}
