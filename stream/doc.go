// Package stream owns records in and out: opening files and stdin,
// sniffing compression, cutting the input into blocks, the worker pool that
// splits, parses, classifies and splices records, the reorder stage that
// puts them back in input order, and the writer.
//
// It never imports package model: the classifier comes in as a Tagger. It
// never re-encodes a JSON record: tags are spliced into the original bytes.
// It never drops a record unless the caller's selection says so.
//
// The pipeline, in one direction and bounded everywhere:
//
//	read+sniff ─► cutter ─► N workers (split lines, parse, score, splice) ─► reorder ─► writer
//
// The reader decodes gzip, zstd and bzip2 (recognised by their first
// bytes) and hands on chunks. The cutter makes blocks of about BlockSize
// bytes ending at a newline, each with a sequence number; it sends a
// smaller block when the input pauses (Pause, 2 ms) or when whole lines
// have waited ten pauses, so a live stream is answered within
// milliseconds. Blocks never span two inputs; an input whose last line has
// no newline gets one. A worker splits its block into lines itself. The
// writer takes blocks strictly in sequence from a ring of window slots; a
// fixed number of blocks exists (three per worker), so memory stays flat
// and a slow reader downstream slows the input down.
//
// Records. A line ends at "\n"; a "\r" just before it belongs to the
// terminator: it is kept in the output, after the spliced keys or the
// text, and is not part of the text scored. Empty and blank lines pass
// through. A line longer than MaxLine (64 MiB) passes through untouched in
// pieces, without being held in memory whole, and is counted.
//
// JSON. A record is checked to be exactly one valid JSON object (RFC 8259;
// no depth limit), without decoding it. Text is found at dotted key paths
// (an array element by its decimal index); escapes are decoded for the
// scorer only. Malformed records pass through unchanged, or go to the
// rejects writer, and are reported with their file and line.
package stream
