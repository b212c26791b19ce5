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

// writeInfoText writes in for people (inspect without --json): one
// "name: value" line per field, the metadata keys that other fields do not
// already show, and the training summary's top-level fields.
func writeInfoText(w io.Writer, in *model.Info) error {
	var b strings.Builder
	line := func(k string, v any) { fmt.Fprintf(&b, "%-15s %v\n", k+":", v) }
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
