// Package linear is the strong bag-of-words baseline reported beside the
// network: multinomial logistic regression with an L2 penalty on tf-idf
// weighted unigrams and bigrams, its regularisation strength chosen on a
// development split.
//
// It owns the n-gram vocabulary and its inverse document frequencies, the
// fit (a deterministic L-BFGS run, gonum's optimize), the choice of C and an
// allocation-free per-goroutine Scorer. It does not tokenize and does no
// I/O: callers pass the tokens the network sees, and the arrays of a Model
// are laid out so the model file can store them as tensors and hand them
// back without parsing (see Model).
package linear
