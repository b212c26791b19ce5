package stream

import (
	"errors"
	"fmt"
	"strings"
)

// Sentinel errors. A RecordError's Err unwraps to one of the first four; Run's
// error unwraps to ErrTruncated when a compressed input ended early.
var (
	ErrMalformed = errors.New("stream: malformed JSON")
	ErrNotString = errors.New("stream: text value is not a string")
	ErrTooLong   = errors.New("stream: line too long")
	ErrTruncated = errors.New("stream: truncated or corrupt compressed input")
	// ErrOutputClosed means the reader of the output went away (EPIPE);
	// a filter should then end quietly.
	ErrOutputClosed = errors.New("stream: output closed by its reader")
	// ErrCutOutput means a compressed file to append to does not decode to
	// its end (a killed writer cut its last gzip member or zstd frame);
	// nothing is appended to it.
	ErrCutOutput = errors.New("stream: compressed file is cut or corrupt")
)

// RecordError is a problem with one input record. Line counts from 1 within
// File ("-" for standard input). The record itself was passed through or
// written to the rejects file, never lost.
type RecordError struct {
	File string
	Line int64
	Err  error
}

// Error is "file:line: problem". The sentinels' package prefix is left
// out: the message is for the person reading stderr, and errors.Is still
// finds the sentinel.
func (e *RecordError) Error() string {
	return fmt.Sprintf("%s:%d: %s", e.File, e.Line, bare(e.Err))
}

// bare is err's message without a leading "stream: ".
func bare(err error) string {
	return strings.TrimPrefix(err.Error(), "stream: ")
}

func (e *RecordError) Unwrap() error { return e.Err }

// HeaderError is a CSV or TSV header that cannot be used: a column named
// twice, a text (or label) column it lacks, or a header that does not
// parse. No record of its input is read: Run ends after the records
// before it (other inputs' records), and a Reader stops.
type HeaderError struct {
	File string
	Line int64
	Err  error
}

func (e *HeaderError) Error() string {
	return fmt.Sprintf("%s:%d: header: %s", e.File, e.Line, bare(e.Err))
}

func (e *HeaderError) Unwrap() error { return e.Err }

// InputError is a problem with one input as a whole: it could not be opened,
// or it ended early or was corrupt after Line complete lines. Run goes on with
// the next input and returns the first InputError at the end.
type InputError struct {
	File string
	Line int64 // complete lines read before the problem
	Err  error
}

func (e *InputError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("%s: %s (after line %d; the partial line after it was not written)", e.File, bare(e.Err), e.Line)
	}
	return fmt.Sprintf("%s: %s", e.File, bare(e.Err))
}

func (e *InputError) Unwrap() error { return e.Err }
