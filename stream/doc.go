// Package stream owns records in and out: opening files and stdin,
// sniffing compression, cutting the input into blocks, the worker pool that
// splits, parses, classifies and splices records, the reorder stage that
// puts them back in input order, and the writer.
//
// It never imports package model: the classifier comes in as a Tagger. It
// never re-encodes a JSON record: tags are spliced into the original bytes.
// It never drops a record unless the caller's selection says so.
package stream
