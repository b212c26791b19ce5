package model

// Tokenizer cuts text into tokens per its settings. It is read-only and safe
// for concurrent use; the per-call storage is the caller's Tokens.
//
// STUB: replaced by the tokenizer work (NFKC, case folding, UAX #29 words,
// placeholders, ASCII fast path).
type Tokenizer struct {
	s TokenizerSettings
}

// NewTokenizer returns a tokenizer with settings s.
func NewTokenizer(s TokenizerSettings) *Tokenizer { return &Tokenizer{s: s} }

// Settings returns the tokenizer's settings.
func (t *Tokenizer) Settings() TokenizerSettings { return t.s }

// Tokens is reusable storage for one record's tokens. The zero value is
// empty and ready to use. Token i is valid until the next Tokenize or Reset.
type Tokens struct {
	buf  []byte
	ends []int32
}

// Len is the number of tokens.
func (ts *Tokens) Len() int { return len(ts.ends) }

// At returns token i; the slice aliases ts and must not be kept.
func (ts *Tokens) At(i int) []byte {
	start := int32(0)
	if i > 0 {
		start = ts.ends[i-1]
	}
	return ts.buf[start:ts.ends[i]]
}

// Reset empties ts, keeping its storage.
func (ts *Tokens) Reset() { ts.buf, ts.ends = ts.buf[:0], ts.ends[:0] }

func (ts *Tokens) add(tok []byte) {
	ts.buf = append(ts.buf, tok...)
	ts.ends = append(ts.ends, int32(len(ts.buf)))
}

// Tokenize replaces the contents of ts by the tokens of text, at most
// Settings().Limit() of them. Invalid UTF-8 is replaced by U+FFFD.
func (t *Tokenizer) Tokenize(ts *Tokens, text []byte) {
	ts.Reset()
	start := -1
	for i, c := range text {
		isWord := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9'
		if isWord && start < 0 {
			start = i
		}
		if !isWord && start >= 0 {
			ts.add(text[start:i])
			start = -1
		}
	}
	if start >= 0 {
		ts.add(text[start:])
	}
}
