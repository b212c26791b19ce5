package model

import (
	"convtag/model/linear"
	"convtag/model/token"
)

// Conv is one convolution of a given width.
type Conv struct {
	Width int
	// W holds the filters in PyTorch's Conv1d layout [F][d][Width]:
	// W[(f*d+j)*Width+k] is filter f's weight for embedding component j at
	// tap k (the k-th word of the window).
	W []float32
	B []float32 // [F]
}

// Dense is a fully connected layer y = W x + B.
type Dense struct {
	In, Out int
	W       []float32 // [Out][In], row-major, as torch.nn.Linear.weight
	B       []float32 // [Out]
}

// FoldTable is one width's folded convolution: for every embedding row r,
// tap k and filter f, the dot product of row r with filter f's weights at
// tap k. Exactly one of F32 and F16 is set, laid out [rows][Width][F].
type FoldTable struct {
	Width int
	F32   []float32
	F16   []uint16 // IEEE 754 half precision bits
}

// Model is a trained (or randomly initialised) network with its vocabulary,
// tokenizer settings and labels. It is read-only after construction and safe
// for concurrent use; every slice may alias a memory-mapped file and must not
// be written. Close releases the mapping; no Predictor may be used after it.
type Model struct {
	Config        Config
	TokenSettings token.Settings
	Labels        []string

	// Multi marks a multi-label model: one sigmoid per label (each in
	// [0, 1], independently) instead of a softmax over the labels, and a
	// record gets every label whose probability reaches its threshold.
	Multi bool
	// Thresholds are a multi-label model's per-label thresholds (chosen on
	// the dev split by training), aligned with Labels; nil when !Multi.
	Thresholds []float64

	// Emb is the embedding matrix [Rows()][Dim]: row 0 is padding (all
	// zero), rows 1..V the vocabulary words in order, rows V+1..V+B the
	// shared buckets for unknown words.
	Emb    []float32
	Convs  []Conv // one per width, in Config.Widths order
	Hidden *Dense // nil when Config.Hidden == 0; ReLU follows it
	Out    Dense  // to len(Labels) logits

	// Fold holds the folded tables, one per width, or is nil.
	Fold []FoldTable

	Vocab *Vocab

	// Baseline is an optional opaque blob stored beside the network: the
	// naive-Bayes baseline in package nb's encoding, written by training
	// (tensor "baseline", U8). It is a tensor rather than metadata so that
	// opening a file never parses it. nil when absent; aliases the file.
	Baseline []byte

	// Linear is the optional logistic-regression baseline on tf-idf
	// unigrams and bigrams of the same tokens (tensors "linear.*"), which
	// the combined scorer mixes with the network; nil when absent. Its
	// arrays alias the file.
	Linear *linear.Model

	// Scorer is what a Predictor scores with by default (metadata
	// "scorer"); the zero value is the network alone.
	Scorer Scorer

	// Meta is the file's __metadata__, including the keys this package
	// writes itself (see the Meta* constants).
	Meta map[string]string

	closer func() error
	tok    *token.Tokenizer // built from TokenSettings by New, Open and Load
	src    *source          // the file's bytes when opened or loaded (open.go); nil when built
}

// Rows is the number of embedding rows: padding, vocabulary and buckets.
func (m *Model) Rows() int { return 1 + m.Vocab.Len() + m.Config.Buckets }

// Close releases the model's file mapping, if any.
func (m *Model) Close() error {
	if m.closer == nil {
		return nil
	}
	c := m.closer
	m.closer = nil
	return c()
}

// AppendRows appends the embedding rows of text's tokens to dst, cutting
// the text with m's tokenizer into the scratch ts.
func (m *Model) AppendRows(dst []int32, ts *token.Tokens, text []byte) []int32 {
	m.Tokenizer().Tokenize(ts, text)
	for i := range ts.Len() {
		dst = append(dst, m.Vocab.Row(ts.At(i)))
	}
	return dst
}
