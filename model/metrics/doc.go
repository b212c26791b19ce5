// Package metrics owns the figures that say how good a classifier is on
// labelled data: accuracy, per-label precision, recall and F1, macro-F1,
// the confusion matrix, calibration (expected calibration error and a
// reliability table), confidence thresholds, precision-recall curves and
// mean ± standard deviation over folds. Sub-package plots draws them.
//
// Its input is plain numbers: for each record the index of its true label
// and the classifier's probability per label. It knows nothing of models,
// files or record streams, so any classifier (the network, the naive-Bayes
// baseline) is measured by the same code. It must not import package model.
//
// Conventions, each stated where it is defined: the predicted label is the
// most probable one (the lowest index on ties), its probability is the
// record's confidence, a ratio with a zero denominator is 0 in the
// per-label table (as scikit-learn's zero_division default gives) and
// undefined (NaN, JSON null) in the threshold tables, where "nothing kept"
// must not read as a figure.
package metrics
