package model

import (
	"encoding/json"
	"maps"
	"slices"
	"strconv"

	"convtag/model/token"
)

// Info describes a model for people and programs (`convtag inspect`). Its
// JSON form is the machine-readable description; the command prints the
// same for people. Every slice and map is a copy the caller owns.
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
		Tokenizer:     m.TokenSettings,
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
