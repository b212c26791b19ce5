package model

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode/utf8"

	"convtag/model/safetensors"
)

// A model file is a safetensors container (package model/safetensors reads
// and writes it, with every container check); this file has the errors the
// loader reports and turns the container's errors into them.

// Errors that the loader reports about the model's schema, wrapped in a
// *FormatError with the file and tensor and a detail; test for them with
// errors.Is. A problem with the container itself wraps one of
// model/safetensors' sentinels (safetensors.ErrHeader, ErrOffsets, ...)
// in a *FormatError the same way.
var (
	ErrNotModel         = errors.New("model: not a convtag model")
	ErrVersion          = errors.New("model: unsupported format version")
	ErrMetadata         = errors.New("model: bad metadata")
	ErrMissingTensor    = errors.New("model: missing tensor")
	ErrUnexpectedTensor = errors.New("model: unexpected tensor")
	ErrSchema           = errors.New("model: tensor does not fit the model")
	ErrVocab            = errors.New("model: bad vocabulary")
	ErrNotFinite        = errors.New("model: weight is NaN or infinite")
	ErrForward          = errors.New("model: forward pass gives no probabilities")
	ErrBaseline         = errors.New("model: bad baseline")
	ErrNoChecksum       = errors.New("model: no checksum")
	ErrChecksum         = errors.New("model: checksum mismatch")
)

// FormatError is a problem with a model file's bytes. File is the file name
// (empty when parsing bytes with no name), Tensor the tensor concerned (or
// empty), and Err wraps one of the Err* sentinels of this package or of
// model/safetensors with a detail.
type FormatError struct {
	File   string
	Tensor string
	Err    error
}

// Error is one line: "model: FILE: tensor NAME: problem: detail".
func (e *FormatError) Error() string {
	var b strings.Builder
	b.WriteString("model: ")
	if e.File != "" {
		b.WriteString(e.File)
		b.WriteString(": ")
	}
	if e.Tensor != "" {
		b.WriteString("tensor ")
		b.WriteString(quoteCapped(e.Tensor))
		b.WriteString(": ")
	}
	if e.Err == nil {
		b.WriteString("bad model file")
		return b.String()
	}
	// The sentinels carry a package prefix; the line has one already.
	msg := e.Err.Error()
	if m, ok := strings.CutPrefix(msg, "model: "); ok {
		msg = m
	} else {
		msg = strings.TrimPrefix(msg, "safetensors: ")
	}
	b.WriteString(msg)
	return b.String()
}

func (e *FormatError) Unwrap() error { return e.Err }

// fromContainer turns a *safetensors.Error into a *FormatError naming the
// same tensor; other errors pass unchanged.
func fromContainer(err error) error {
	var se *safetensors.Error
	if errors.As(err, &se) {
		return &FormatError{Tensor: se.Tensor, Err: se.Err}
	}
	return err
}

// quoteCap is how many bytes of a value from the file an error quotes: a
// crafted name or label may be megabytes long, an error is one line.
const quoteCap = 200

// quoteCapped quotes s as strconv.Quote does, cut after quoteCap bytes (at
// a rune boundary) and then marked with "…".
func quoteCapped(s string) string {
	if len(s) <= quoteCap {
		return strconv.Quote(s)
	}
	cut := quoteCap
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return strconv.Quote(s[:cut]) + "…"
}

func formatErr(tensor string, sentinel error, format string, args ...any) *FormatError {
	err := sentinel
	if format != "" {
		err = fmt.Errorf("%w: "+format, append([]any{sentinel}, args...)...)
	}
	return &FormatError{Tensor: tensor, Err: err}
}

// checkNoDuplicateKeys reports the first object in the JSON document data
// that repeats a key.
func checkNoDuplicateKeys(data []byte) error {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.UseNumber()
	// One entry per open container: the keys seen so far, or nil for an
	// array.
	var stack []map[string]bool
	expectKey := false
	for {
		t, err := dec.Token()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
		if expectKey {
			expectKey = false
			if k, ok := t.(string); ok {
				top := stack[len(stack)-1]
				if top[k] {
					return fmt.Errorf("duplicate key %q", k)
				}
				top[k] = true
				continue
			}
		}
		switch t {
		case json.Delim('{'):
			stack = append(stack, map[string]bool{})
		case json.Delim('['):
			stack = append(stack, nil)
		case json.Delim('}'), json.Delim(']'):
			stack = stack[:len(stack)-1]
		}
		// The next token is a key when the innermost container is an object.
		expectKey = len(stack) > 0 && stack[len(stack)-1] != nil
	}
}
