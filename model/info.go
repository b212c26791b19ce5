package model

import (
	"encoding/json"
	"fmt"
	"io"
	"maps"
	"slices"
	"strconv"
	"strings"

	"convtag/model/token"
)

// Info describes a model for people and programs (`convtag inspect`). Its
// JSON form is the machine-readable description; WriteText prints the same
// for people. Every slice and map is a copy the caller owns.
type Info struct {
	File          string         `json:"file,omitempty"`      // set by the caller; Info leaves it empty
	FileSize      int64          `json:"file_size,omitempty"` // bytes; 0 for a model built in memory
	FormatVersion int            `json:"format_version"`
	Labels        []string       `json:"labels"`
	Vocabulary    int            `json:"vocabulary"` // known words, V
	Buckets       int            `json:"buckets"`    // shared rows for unknown words, B
	Rows          int            `json:"rows"`       // embedding rows, 1+V+B
	Dim           int            `json:"dim"`
	Widths        []int          `json:"widths"`
	Filters       int            `json:"filters"`
	Hidden        int            `json:"hidden"`
	Parameters    int64          `json:"parameters"` // trainable weights, fold tables excluded
	Folded        bool           `json:"folded"`
	FoldDType     string         `json:"fold_dtype,omitempty"` // "F32" or "F16" when folded
	Tokenizer     token.Settings `json:"tokenizer"`
	Checksum      string         `json:"checksum,omitempty"`
	BaselineBytes int            `json:"baseline_bytes,omitempty"` // size of the stored naive-Bayes baseline
	CreatedBy     string         `json:"created_by,omitempty"`
	// Training is the training summary decoded from its metadata string:
	// JSON exactly as written, or nil when there is none or it is not
	// valid JSON (TrainingError then says why).
	Training      json.RawMessage `json:"training,omitempty"`
	TrainingError string          `json:"training_error,omitempty"`
	// Metadata is every metadata key and value, as stored.
	Metadata map[string]string `json:"metadata"`
}

// Info describes m. It reads only the header-sized parts of the model.
func (m *Model) Info() Info {
	in := Info{
		FormatVersion: FormatVersion,
		Labels:        slices.Clone(m.Labels),
		Dim:           m.Config.Dim,
		Widths:        slices.Clone(m.Config.Widths),
		Filters:       m.Config.Filters,
		Hidden:        m.Config.Hidden,
		Buckets:       m.Config.Buckets,
		Tokenizer:     m.Tokenizer,
		Checksum:      m.Meta[MetaChecksum],
		BaselineBytes: len(m.Baseline),
		CreatedBy:     m.Meta[MetaCreatedBy],
		Metadata:      make(map[string]string, len(m.Meta)),
	}
	maps.Copy(in.Metadata, m.Meta)
	if v, err := strconv.Atoi(m.Meta[MetaFormatVersion]); err == nil {
		in.FormatVersion = v
	}
	if m.src != nil {
		in.FileSize = int64(len(m.src.file))
	}
	if m.Vocab != nil {
		in.Vocabulary = m.Vocab.Len()
		in.Rows = m.Rows()
	}
	n := int64(len(m.Emb))
	for _, c := range m.Convs {
		n += int64(len(c.W) + len(c.B))
	}
	if m.Hidden != nil {
		n += int64(len(m.Hidden.W) + len(m.Hidden.B))
	}
	in.Parameters = n + int64(len(m.Out.W)+len(m.Out.B))
	if len(m.Fold) > 0 {
		in.Folded = true
		in.FoldDType = "F32"
		if m.Fold[0].F16 != nil {
			in.FoldDType = "F16"
		}
	}
	if s, ok := m.Meta[MetaTraining]; ok {
		if json.Valid([]byte(s)) {
			in.Training = json.RawMessage(s)
		} else {
			in.TrainingError = "training summary is not valid JSON"
		}
	}
	return in
}

// WriteText writes in for people: one "name: value" line per field, the
// metadata keys that other fields do not already show, and the training
// summary's top-level fields.
func (in *Info) WriteText(w io.Writer) error {
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
	shown := map[string]bool{MetaFormat: true, MetaFormatVersion: true, MetaLabels: true, MetaConfig: true, MetaTokenizer: true, MetaChecksum: true, MetaCreatedBy: true, MetaTraining: true}
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
