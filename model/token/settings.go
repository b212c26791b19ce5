package token

import "fmt"

// DefaultMaxTokens is the token cap of the zero Settings.
const DefaultMaxTokens = 400

// Settings say how text is cut into tokens. They are stored in the
// model file so that training and tagging cut text identically.
type Settings struct {
	// KeepPunct keeps punctuation tokens; by default they are dropped.
	KeepPunct bool `json:"keep_punct"`
	// MaxTokens caps the tokens taken from one record (the rest are
	// ignored); 0 means DefaultMaxTokens.
	MaxTokens int `json:"max_tokens"`
	// NoPlaceholders keeps URLs, e-mail addresses, handles and numbers as
	// ordinary tokens instead of replacing them by placeholders.
	NoPlaceholders bool `json:"no_placeholders"`
}

// MaxTokensLimit is the largest max_tokens a model file may set: a
// predictor sizes its buffers from it, so a file must not be able to ask
// for more memory than a record of that many tokens needs.
const MaxTokensLimit = 1 << 20

// Validate reports the first setting out of range, naming its key.
func (s Settings) Validate() error {
	if s.MaxTokens < 0 || s.MaxTokens > MaxTokensLimit {
		return fmt.Errorf("max_tokens %d out of range 0..%d", s.MaxTokens, MaxTokensLimit)
	}
	return nil
}

// Limit is the effective token cap.
func (s Settings) Limit() int {
	if s.MaxTokens <= 0 {
		return DefaultMaxTokens
	}
	return s.MaxTokens
}
