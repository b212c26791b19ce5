// Package safetensors reads and writes the safetensors container, per the
// format's open specification: an 8-byte little-endian header length N,
// N bytes of UTF-8 JSON mapping each tensor name to {"dtype", "shape",
// "data_offsets": [begin, end]} plus an optional "__metadata__" map of
// strings, then one data buffer that the tensors' byte ranges cover
// exactly.
//
// It owns the container and nothing above it: Parse checks every byte a
// crafted file could get wrong and gives zero-copy views of the data; Encode
// writes deterministic bytes that Parse accepts. What the tensors mean (a
// convtag model's schema) belongs to package model. It does no I/O beyond
// the io.Writer it is given and imports nothing of this module.
package safetensors
