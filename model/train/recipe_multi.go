package train

import (
	"context"
	"fmt"
	"maps"
	"runtime"
	"slices"
	"strings"

	"convtag/model"
	"convtag/model/metrics"
	"convtag/model/nb"
	"convtag/model/token"
)

// BaselineKindMulti describes the baseline FitMulti scores beside the
// network (not stored in the model file).
const BaselineKindMulti = "one-vs-rest multinomial naive Bayes per label, lowercase unigrams+bigrams, Laplace smoothing"

// tagSep joins a record's tags into one key (for the dev split and the
// data hash); labels never hold control characters.
const tagSep = "\t"

// FitMulti is Fit for multi-label records (Record.Tags: none, one or
// several labels each): one sigmoid output per label, trained with binary
// cross-entropy (ClassWeightsBalanced weights each label's positives by
// negatives/positives), and per-label thresholds chosen on dev by
// r.ThresholdGoal and stored in the model. Without dev records, a
// DevFraction of train is held out, stratified by the records' tag sets
// (a set held by a single record stays in train). The model's labels are
// r.Labels, else the sorted tags of the training records. The naive-Bayes
// baseline is one-vs-rest and scored on dev, not stored.
func (r Recipe) FitMulti(ctx context.Context, trainRecs, dev []Record, p Progress) (*model.Model, *Summary, error) {
	if r.ClassWeights != "" && r.ClassWeights != ClassWeightsNone && r.ClassWeights != ClassWeightsBalanced {
		return nil, nil, fmt.Errorf("unknown class weights %q (want %s or %s)", r.ClassWeights, ClassWeightsNone, ClassWeightsBalanced)
	}
	tok := token.New(token.Settings{})
	var ts token.Tokens
	type mrec struct {
		tokenized
		tags []string
	}
	cut := func(recs []Record) []mrec {
		out := make([]mrec, len(recs))
		for i, rec := range recs {
			tok.Tokenize(&ts, []byte(rec.Text))
			tags := slices.Clone(rec.Tags)
			slices.Sort(tags)
			tags = slices.Compact(tags)
			t := mrec{tokenized: tokenized{label: strings.Join(tags, tagSep), text: rec.Text}, tags: tags}
			for j := range ts.Len() {
				t.tokens = append(t.tokens, string(ts.At(j)))
			}
			out[i] = t
		}
		return out
	}
	all := cut(trainRecs)
	var tr, dv []mrec
	if dev != nil {
		tr, dv = all, cut(dev)
	} else {
		keys := make([]tokenized, len(all))
		for i, t := range all {
			keys[i] = t.tokenized
		}
		setOf := labelIndex(keys)
		idx := make([]int, len(all))
		for i, t := range all {
			idx[i] = setOf[t.label]
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
		seen := map[string]bool{}
		for _, t := range tr {
			for _, l := range t.tags {
				seen[l] = true
			}
		}
		labels = slices.Sorted(maps.Keys(seen))
	}
	if len(labels) < 2 {
		return nil, nil, &FewLabelsError{Found: len(labels)}
	}
	li := map[string]int{}
	for i, l := range labels {
		li[l] = i
	}
	tagCounts := func(rs []mrec) map[string]int {
		c := map[string]int{}
		for _, t := range rs {
			for _, l := range t.tags {
				c[l]++
			}
			if len(t.tags) == 0 {
				c[""]++
			}
		}
		return c
	}
	trCounts := tagCounts(tr)
	for _, l := range labels {
		switch n := trCounts[l]; {
		case n == 0:
			p.warn("label %q has no training record", l)
		case n < 2:
			p.warn("label %q has fewer than 2 training records", l)
		}
	}
	for _, t := range tr {
		for _, l := range t.tags {
			if _, ok := li[l]; !ok {
				return nil, nil, fmt.Errorf("training record of label %q, not one of the recipe's labels", l)
			}
		}
	}
	// A dev record's tags outside the model's labels cannot be scored;
	// the record is kept with its other tags.
	dropped := 0
	for i := range dv {
		kept := dv[i].tags[:0:0]
		for _, l := range dv[i].tags {
			if _, ok := li[l]; ok {
				kept = append(kept, l)
			} else {
				dropped++
			}
		}
		dv[i].tags = kept
	}
	if dropped > 0 {
		p.warn("%d tags of dev records are absent from the training records and are not scored", dropped)
	}
	if len(dv) == 0 {
		p.warn("no dev records: the last epoch is kept, every threshold is %g and no figure can be reported", model.DefaultThreshold)
	}

	counts := map[string]int{}
	for _, t := range tr {
		for _, w := range t.tokens {
			counts[w]++
		}
	}
	words := BuildWords(counts, r.MinSeen, r.MaxWords)
	if r.Vectors != nil && r.Vectors.Dim != r.Dim {
		return nil, nil, fmt.Errorf("embedding size %d but %s has %d-dimensional vectors", r.Dim, r.VectorsName, r.Vectors.Dim)
	}
	m, err := model.New(r.Config(), token.Settings{}, labels, words, r.Seed)
	if err != nil {
		return nil, nil, err
	}
	m.Multi = true
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
	examples := func(rs []mrec) []Example {
		out := make([]Example, len(rs))
		for i, t := range rs {
			rows := make([]int32, len(t.tokens))
			for j, w := range t.tokens {
				rows[j] = m.Vocab.Row([]byte(w))
			}
			tags := make([]int, len(t.tags))
			for j, l := range t.tags {
				tags[j] = li[l]
			}
			out[i] = Example{Rows: rows, Tags: tags}
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
		OnBatch: p.Batch, OnEpoch: p.Epoch, ThresholdGoal: r.ThresholdGoal}
	if r.Patience == 0 {
		opt.Patience = -1
	}
	if r.ClassWeights == ClassWeightsBalanced {
		opt.ClassWeights = BalancedPositiveWeights(trEx, len(labels))
	}
	parts := make([]string, len(labels))
	for i, l := range labels {
		parts[i] = fmt.Sprintf("%s %d", l, trCounts[l])
	}
	p.info("training multi-label on %d records (%s; %d with no tag), %d dev records; %d words + %d unseen-word rows, d=%d, widths %s x %d filters",
		len(tr), strings.Join(parts, ", "), trCounts[""], len(dv), len(words), r.Buckets, r.Dim, intsString(r.Widths), r.Filters)
	res, err := Train(m, trEx, devEx, opt)
	if err != nil {
		return nil, nil, err
	}

	gold := indicator(devEx, len(labels))
	// The baseline: one naive-Bayes classifier per label, yes or no.
	bs := BaselineScores{Kind: BaselineKindMulti}
	if len(dv) > 0 {
		docs := make([][]string, len(tr))
		for i, t := range tr {
			docs[i] = t.tokens
		}
		bpred := make([][]bool, len(dv))
		for i := range bpred {
			bpred[i] = make([]bool, len(labels))
		}
		for c := range labels {
			ys := make([]int, len(tr))
			for i, e := range trEx {
				if slices.Contains(e.Tags, c) {
					ys[i] = 1
				}
			}
			base, err := nb.Fit(docs, ys, 2, 1)
			if err != nil {
				return nil, nil, fmt.Errorf("baseline: %w", err)
			}
			for i, t := range dv {
				bpred[i][c] = base.Predict(t.tokens) == 1
			}
		}
		s, err := metrics.ScoreSets(labels, gold, bpred)
		if err != nil {
			return nil, nil, err
		}
		bs.DevAccuracy, bs.DevMacroF1, bs.DevMicroF1 = s.SubsetAccuracy, s.Macro.F1, s.Micro.F1
	}

	var net Scores
	var devKnown *float64
	if len(dv) > 0 {
		pr := m.NewPredictor()
		npred := make([][]bool, len(dv))
		toks, known := 0, 0
		for i, t := range dv {
			probs := pr.Predict([]byte(t.text))
			npred[i] = make([]bool, len(labels))
			for c, v := range probs {
				npred[i][c] = float64(v) >= m.Thresholds[c]
			}
			toks += pr.TokenCount()
			known += pr.KnownCount()
		}
		if toks > 0 {
			share := round6(float64(known) / float64(toks))
			devKnown = &share
		}
		s, err := metrics.ScoreSets(labels, gold, npred)
		if err != nil {
			return nil, nil, err
		}
		net = Scores{DevAccuracy: s.SubsetAccuracy, DevMacroF1: s.Macro.F1, DevMicroF1: s.Micro.F1, DevPerLabel: s.PerLabel}
	}
	toks := func(rs []mrec) []tokenized {
		out := make([]tokenized, len(rs))
		for i, t := range rs {
			out[i] = t.tokenized
		}
		return out
	}
	trT, dvT := toks(tr), toks(dv)
	sum := &Summary{
		Mode: model.ModeMulti, Thresholds: res.Thresholds, Goal: r.ThresholdGoal.String(),
		Description: r.Description, IntendedUse: r.IntendedUse, NotFor: r.NotFor,
		VectorsFile: r.VectorsName, Scorer: "network", DevKnownShare: devKnown,
		DataSHA256: dataHash(trT, dvT),
		Records:    map[string]int{"train": len(tr), "dev": len(dv), "train_no_tag": trCounts[""]},
		Counts:     map[string]map[string]int{"train": trCounts, "dev": tagCounts(dv)},
		Vocabulary: len(words), Coverage: coverage,
		Options: map[string]any{"epochs": r.Epochs, "patience": r.Patience, "batch": r.Batch, "seed": r.Seed,
			"jobs": jobs, "optimizer": r.Optimizer, "learning_rate": r.LR, "min_seen": r.MinSeen,
			"max_words": r.MaxWords, "class_weights": r.ClassWeights, "freeze_vectors": r.Freeze,
			"dropout": DefaultDropout, "max_norm": DefaultMaxNorm, "dev_fraction": r.DevFraction,
			"multi_label": true, "label_threshold_goal": r.ThresholdGoal.String()},
		EpochsRun: res.EpochsRun, BestEpoch: res.BestEpoch,
		Network:  net,
		Baseline: bs,
		Seconds:  res.Seconds,
	}
	for _, e := range res.Curve {
		sum.Curve = append(sum.Curve, CurvePoint{e.Epoch, round6(e.Loss), e.TrainAcc, e.DevAcc, e.DevMacroF1})
	}
	m.Meta[MetaSeen] = SeenMeta(textsOf(trT), textsOf(dvT))
	if !r.NoFold {
		model.FoldModel(m, r.FoldHalf)
	}
	return m, sum, nil
}
