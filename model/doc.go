// Package model owns the network: the tokenizer, the vocabulary, the
// safetensors model file, the forward pass (direct and folded) and training.
//
// It is pure computation. It must not read or write streams of records, and
// its only I/O is opening (memory-mapping) and saving a model file. The
// record pipeline lives in package stream, which never imports this one.
//
// A *Model is read-only once built or opened and is safe for concurrent use
// by any number of goroutines. Per-goroutine scratch memory lives in a
// Predictor, which must not be shared.
package model
