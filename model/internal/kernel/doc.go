// Package kernel holds the inner loops of the forward pass, training and
// word-vector training: the folded-convolution gather-add (F32 and F16
// tables), dot products, axpy, the training convolution (a small GEMM),
// the Adadelta step and half-precision conversion.
//
// There is one dispatch table: a Set holds one implementation of every
// kernel; All lists the sets this CPU and build can run (Generic, plain Go,
// first) and Active is the fastest, chosen once at start-up. The assembly
// (amd64 only: AVX2 with FMA and F16C, AVX-512) is built under
// "amd64 && !purego", so -tags purego leaves Generic alone everywhere.
// Every assembly kernel has a plain-Go twin, and the tests compare each set
// with Generic on every set this machine has.
//
// The ten folded-convolution variants in fold_amd64.s (F32 or F16 table,
// AVX-512 or AVX2, 8, 4 or 1 vectors per chunk) are generated from one
// text/template by foldgen; dot_amd64.s and train_amd64.s are written by
// hand.
//
// It owns no model and no I/O; it imports nothing of this module.
package kernel

//go:generate go run ./foldgen -o fold_amd64.s
