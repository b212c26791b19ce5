// Package train fits a model's weights: back-propagation through the
// network of package model, Adadelta and Adam, dropout, max-norm, early
// stopping on dev accuracy and -j data parallelism (Train), and the data
// steps around it (CountTokens, BuildWords, StratifiedSplit,
// StratifiedFolds).
//
// It imports package model and is never imported by it. Like model it is
// pure computation: it reads and writes no files or streams.
package train
