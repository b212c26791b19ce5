package main

import (
	"encoding/json"
	"fmt"
	"io"
	"maps"
	"slices"
	"strconv"
	"strings"

	"convtag/model"
)

// writeInfoText writes in for people (inspect without --json): the model
// card first (what the model is for, what it tags and how well, what it
// was trained on and how, what tag scores with), then one "name: value"
// line per field of the file, the learning curve as a table, and with all
// the metadata keys and the training summary's raw fields.
func writeInfoText(w io.Writer, in *model.Info, all bool) error {
	var b strings.Builder
	line := func(k string, v any) { fmt.Fprintf(&b, "%-15s %v\n", k+":", v) }
	var sum *trainSummary
	if in.Training != nil {
		var s trainSummary
		if json.Unmarshal(in.Training, &s) == nil {
			sum = &s
		}
	}
	if sum != nil {
		writeCard(&b, line, sum, in)
	}
	if in.File != "" {
		line("file", in.File)
	}
	if in.FileSize > 0 {
		line("file size", fmt.Sprintf("%d bytes", in.FileSize))
	}
	line("format version", in.FormatVersion)
	line("labels", strings.Join(quoteAll(in.Labels), " "))
	line("vocabulary", fmt.Sprintf("%d words + %d rows for unseen words + padding = %d rows", in.Vocabulary, in.Buckets, in.Rows))
	line("dim", in.Dim)
	line("widths", strings.Trim(fmt.Sprint(in.Widths), "[]"))
	line("filters", fmt.Sprintf("%d per width", in.Filters))
	if in.Hidden > 0 {
		line("hidden", in.Hidden)
	} else {
		line("hidden", "none")
	}
	line("parameters", in.Parameters)
	if in.Folded {
		line("folded", "yes, "+in.FoldDType)
	} else {
		line("folded", "no")
	}
	line("tokenizer", fmt.Sprintf("keep_punct=%t max_tokens=%d no_placeholders=%t", in.Tokenizer.KeepPunct, in.Tokenizer.Limit(), in.Tokenizer.NoPlaceholders))
	if in.BaselineBytes > 0 {
		line("baseline", fmt.Sprintf("naive Bayes, %d bytes", in.BaselineBytes))
	}
	if in.Checksum != "" {
		line("checksum", in.Checksum)
	}
	if in.CreatedBy != "" {
		line("created by", in.CreatedBy)
	}
	if sum != nil && len(sum.Curve) > 0 {
		fmt.Fprintf(&b, "\nlearning curve (best epoch %d of %d)\n", sum.BestEpoch, sum.EpochsRun)
		t := table{indent: "  "}
		t.add("epoch", "loss", "train accuracy", "dev accuracy", "dev macro-F1", "")
		for _, c := range sum.Curve {
			mark := ""
			if c.Epoch == sum.BestEpoch {
				mark = "kept"
			}
			t.add(itoa(c.Epoch), strconv.FormatFloat(c.Loss, 'f', 4, 64), f4(c.TrainAcc), f4(c.DevAcc), f4(c.DevMacroF1), mark)
		}
		t.write(&b)
	}
	if !all {
		if in.Training != nil || len(in.Metadata) > 0 {
			b.WriteString("\n(inspect --all shows every metadata field; --json all of it for programs)\n")
		}
		_, err := io.WriteString(w, b.String())
		return err
	}
	b.WriteString("\n")
	shown := map[string]bool{model.MetaFormat: true, model.MetaFormatVersion: true, model.MetaLabels: true, model.MetaConfig: true, model.MetaTokenizer: true, model.MetaChecksum: true, model.MetaCreatedBy: true, model.MetaTraining: true}
	for _, k := range slices.Sorted(maps.Keys(in.Metadata)) {
		if !shown[k] {
			v := in.Metadata[k]
			if len(v) > 120 { // e.g. the stored baseline: show its size, not its bytes
				line("meta "+k, fmt.Sprintf("(%d bytes; see --json)", len(v)))
				continue
			}
			line("meta "+k, strconv.Quote(v))
		}
	}
	switch {
	case in.TrainingError != "":
		line("training", in.TrainingError)
	case in.Training != nil:
		var fields map[string]json.RawMessage
		if json.Unmarshal(in.Training, &fields) != nil {
			line("training", string(in.Training))
			break
		}
		for _, k := range slices.Sorted(maps.Keys(fields)) {
			line("training "+k, string(fields[k]))
		}
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func quoteAll(s []string) []string {
	q := make([]string, len(s))
	for i, x := range s {
		q[i] = strconv.Quote(x)
	}
	return q
}

// writeCard writes the model card: the trainer's own words, the tags with
// their dev figures, the data, the recipe and the scorer.
func writeCard(b *strings.Builder, line func(string, any), s *trainSummary, in *model.Info) {
	b.WriteString("model card\n")
	if s.Description != "" {
		line("description", s.Description)
	}
	if s.IntendedUse != "" {
		line("intended use", s.IntendedUse)
	}
	if s.NotFor != "" {
		line("not for", s.NotFor)
	}
	if s.Description == "" && s.IntendedUse == "" && s.NotFor == "" {
		line("intended use", "not stated (train --description, --intended-use, --not-for)")
	}
	if len(s.Network.DevPerLabel) > 0 {
		fmt.Fprintf(b, "tags, on %d dev records (network: accuracy %s, macro-F1 %s):\n", s.Records["dev"], f4(s.Network.DevAccuracy), f4(s.Network.DevMacroF1))
		t := table{indent: "  "}
		t.add("label", "precision", "recall", "F1", "support", "trained on")
		for _, l := range s.Network.DevPerLabel {
			t.add(l.Label, f3(l.Precision), f3(l.Recall), f3(l.F1), itoa(l.Support), itoa(s.Counts["train"][l.Label]))
		}
		t.write(b)
	} else {
		line("tags", strings.Join(quoteAll(in.Labels), " "))
	}
	data := strings.Join(s.Files, ", ") + fmt.Sprintf(" (%d records", s.Records["train"])
	if s.Records["skipped"] > 0 {
		data += fmt.Sprintf(", %d skipped", s.Records["skipped"])
	}
	data += ")"
	if len(s.DevFiles) > 0 {
		data += "; dev " + strings.Join(s.DevFiles, ", ")
	} else if s.Records["dev"] > 0 {
		data += fmt.Sprintf("; %d held out for dev", s.Records["dev"])
	}
	line("trained on", data)
	line("data sha256", s.DataSHA256)
	if s.VectorsFile != "" {
		v := s.VectorsFile
		if s.Coverage != nil {
			v += fmt.Sprintf(" (covering %.1f%% of the words)", 100**s.Coverage)
		}
		line("word vectors", v)
	}
	o := s.Options
	recipe := fmt.Sprintf("%v, up to %v epochs (patience %v, best %d of %d), batch %v, dropout %v, max-norm %v, seed %v",
		o["optimizer"], o["epochs"], o["patience"], s.BestEpoch, s.EpochsRun, o["batch"], o["dropout"], o["max_norm"], o["seed"])
	line("recipe", recipe)
	line("network", fmt.Sprintf("vector size %d, windows %s × %d filters, %d words + %d unseen-word rows",
		in.Dim, strings.Trim(fmt.Sprint(in.Widths), "[]"), in.Filters, in.Vocabulary, in.Buckets))
	scorer := s.Scorer
	if scorer == "" {
		scorer = "network"
	}
	size := "built into the binary"
	if in.FileSize > 0 {
		size = humanBytes(int(in.FileSize))
	}
	if in.Folded {
		size += ", " + in.FoldDType + " folded table"
	}
	line("size", size)
	line("tag scores with", fmt.Sprintf("%s (baseline %s: dev accuracy %s)", scorer, "naive Bayes", f4(s.Baseline.DevAccuracy)))
	b.WriteString("\n")
}
