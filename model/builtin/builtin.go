// Package builtin holds the model embedded in the convtag binary, so that
// `convtag tag` works with no model file. It owns nothing but those bytes.
package builtin

import (
	_ "embed"
	"errors"

	"convtag/model"
)

// Name is how errors and `inspect` refer to the embedded model.
const Name = "built-in model"

//go:embed default.safetensors
var data []byte

// Bytes returns the embedded model file. The slice must not be modified.
func Bytes() []byte { return data }

// Open opens the embedded model zero-copy, through the same loader as a
// memory-mapped file.
func Open() (*model.Model, error) {
	if len(data) == 0 {
		return nil, errors.New("built-in model: not yet built (run go generate ./model/builtin)")
	}
	return model.Load(data, Name)
}
