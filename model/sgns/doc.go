// Package sgns learns word vectors from unlabelled text by skip-gram with
// negative sampling (Mikolov, Sutskever, Chen, Corrado and Dean, 2013,
// "Distributed Representations of Words and Phrases and their
// Compositionality", NIPS), the method behind the word2vec tool.
//
// It owns the learning only: counting the vocabulary, the noise
// distribution, sub-sampling, the update rule and the parallel schedule.
// Text comes in through a Corpus, which the caller builds from files,
// decompressors and JSON keys; the words are cut by the model's tokenizer
// (token.New) so that the vectors' words are the tokens a model
// will look up. The result is a *vectors.Set, which package model/vectors
// writes in the common file formats.
//
// Memory is the vocabulary and two matrices of vocabulary × dimension
// float32s. The corpus is never held: it is scanned once to count words
// and once per epoch to train.
package sgns
