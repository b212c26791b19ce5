// Package model owns the network: the vocabulary, the
// safetensors model file and the forward pass (direct and folded). Training
// lives in package train (model/train), which imports this one.
//
// It is pure computation. It must not read or write streams of records, and
// its only I/O is opening (memory-mapping) and saving a model file. The
// record pipeline lives in package stream, which never imports this one.
//
// A *Model is read-only once built or opened and is safe for concurrent use
// by any number of goroutines. Per-goroutine scratch memory lives in a
// Predictor, which must not be shared.
package model

// The model file is a safetensors container (8-byte little-endian header
// length, JSON header, one contiguous buffer), read and written by package
// model/safetensors; this package adds the schema. Tensors, with
// rows = 1 + V + B (padding, words, buckets):
//
//	embedding          F32 [rows, d]
//	convs.{i}.weight   F32 [F, d, w_i]   torch.nn.Conv1d layout
//	convs.{i}.bias     F32 [F]
//	hidden.weight      F32 [H, 3F]       only when Config.Hidden > 0
//	hidden.bias        F32 [H]
//	output.weight      F32 [C, 3F or H]
//	output.bias        F32 [C]
//	fold.{i}           F32 or F16 [rows, w_i, F]   optional, all widths or none
//	vocab.offsets      I64 [V+1]
//	vocab.index        I32 [S]           open addressing, S a power of two > V
//	vocab.bytes        U8  [n]
//	baseline           U8  [m]           optional: the naive-Bayes baseline (package nb)
//
// __metadata__ (string values): format "convtag", format_version "1",
// labels (JSON array), config (JSON Config), tokenizer (JSON
// token.Settings), training (JSON summary, from train), checksum
// "sha256:<hex of the buffer>", created_by; a multi-label model adds mode
// "multi" (absent or "single" otherwise) and label_thresholds (JSON array,
// one threshold in [0, 1] per label, aligned with labels). The tensors are
// the same in both modes: a multi-label model's output layer gives one
// logit per label, read through a sigmoid instead of a softmax.
