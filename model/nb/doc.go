// Package nb is the baseline that every training run reports beside the
// network: a multinomial naive Bayes classifier over lowercase unigrams and
// bigrams of a text's tokens, with Laplace (add-one) smoothing.
//
// It owns only counting, scoring and its own compact text encoding (which
// the trainer stores in the model file's metadata). It does not tokenize:
// callers pass the tokens the network sees.
package nb
