// Package plots draws the figures of package metrics as image files a
// person would rather look at than read: the confusion matrix as a heat map
// with counts, the reliability diagram, the precision-recall curves, and the
// learning curve of a training run.
//
// Each function writes one file; its format follows the file name's
// extension (.png or .svg; gonum.org/v1/plot also knows .pdf, .eps, .jpg
// and .tiff). It draws what it is given and computes no figures itself,
// apart from normalising the confusion matrix's colours. It must not import
// package model: the learning curve comes in as plain epochs.
package plots
