// Package token cuts text into the tokens a model looks up: Unicode
// normalisation and case folding, UAX #29 word boundaries, placeholders for
// URLs, e-mail addresses, handles and numbers, and an ASCII fast path.
//
// It owns the tokenizer's Settings, which a model file stores so that
// training and tagging cut text identically. It imports nothing of this
// module: the model, the baselines and the word-vector trainer all build
// on it.
package token
