// Package vectors reads and writes word vectors in the two common file
// formats that word-embedding tools exchange.
//
// Both formats start with a header line "count dim" (two decimal integers,
// separated by a space). Then, for each of the count words:
//
//   - text: one line "word v1 v2 … vd", values as decimal floating point,
//     separated by spaces or tabs (trailing blanks and a CR are accepted);
//   - binary: the word's bytes, one space, then d little-endian IEEE 754
//     float32 values (4·d bytes), optionally followed by a newline. Writers
//     in the wild differ on that newline, so the reader accepts both.
//
// Read tells the formats apart from the bytes of the first vector (see
// Read), never from a file name. It does not decompress: hand it a
// decompressing reader for a .gz file.
//
// A file that breaks the format gets a *ParseError naming the line (the
// header is line 1, the i-th vector is line i+1; in a binary file also the
// byte offset) and the problem, which unwraps to one of the Err* sentinels.
// A count that disagrees with the vectors present, a line with the wrong
// number of values, a value that is NaN, infinite or out of float32 range,
// and a word that occurs twice are all errors. Memory grows with the bytes
// actually read, never with the header's claims: a crafted count cannot
// cause a large allocation, and Dim is capped at MaxDim.
//
// Beyond the formats it only answers nearest-neighbour queries by cosine
// similarity (Nearest). It does no training and knows nothing of models or
// records. Package model/sgns learns vectors; training
// reads them through this package.
package vectors
