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
	// DropEscapes removes terminal escape sequences before anything else:
	// ECMA-48 control sequences (CSI: ESC "[" or U+009B, parameter bytes
	// 0x30..0x3F, intermediate bytes 0x20..0x2F, a final byte 0x40..0x7E)
	// and operating system commands (OSC: ESC "]" or U+009D, up to BEL,
	// ESC "\" or U+009C), so "\x1b[1mprinter\x1b[0m" is "printer". A
	// sequence that is cut off or holds a byte out of those ranges is
	// kept as text. False in model files without the key (made before
	// it existed), which keep their tokens; Defaults sets it for new
	// models. omitempty keeps those files' metadata bytes as they were.
	DropEscapes bool `json:"drop_escapes,omitempty"`
}

// Defaults are the settings of a new model: the zero Settings with
// DropEscapes on.
func Defaults() Settings { return Settings{DropEscapes: true} }

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
