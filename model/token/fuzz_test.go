package token

import (
	"bytes"
	"reflect"
	"testing"
	"unicode"
	"unicode/utf8"
)

// FuzzTokenize: Tokenize never panics; its tokens are non-empty, valid
// UTF-8, hold no whitespace and number at most Settings().Limit(); two
// calls (fresh and reused storage) agree; the input is left unchanged. On
// the input's ASCII projection (each byte & 0x7f) the fast path agrees
// with the general path, on the input itself the hybrid segmenter agrees
// with uniseg alone, and the incremental path (small chunks and the
// default) agrees with the whole-text path. Seeds are in testdata/fuzz/FuzzTokenize.
func FuzzTokenize(f *testing.F) {
	for _, c := range tokenizeCases {
		f.Add([]byte(c.in), uint8(0))
	}
	f.Add([]byte("Hi, @orla: 10:30 https://ferry.example/x?y=1 (ok)."), uint8(1))
	f.Add([]byte("mail desk@ferry.example"), uint8(2))
	f.Add([]byte("a b c d e f g h"), uint8(3<<2))
	f.Add([]byte("\x1b[1mprinter\x1b[0m \x1b]0;t\x07ok \x1b[1"), uint8(32))
	f.Fuzz(func(t *testing.T, text []byte, flags uint8) {
		set := Settings{
			KeepPunct:      flags&1 != 0,
			NoPlaceholders: flags&2 != 0,
			MaxTokens:      int(flags >> 2 & 7), // 0: the default limit
			DropEscapes:    flags&32 != 0,
		}
		tk := New(set)
		orig := bytes.Clone(text)
		var ts Tokens
		tk.Tokenize(&ts, text)
		if !bytes.Equal(text, orig) {
			t.Fatalf("input changed: %+q -> %+q", orig, text)
		}
		if ts.Len() > set.Limit() {
			t.Fatalf("%d tokens, limit %d", ts.Len(), set.Limit())
		}
		first := tokStrings(&ts)
		for i, tok := range first {
			if tok == "" {
				t.Fatalf("token %d empty in %q", i, first)
			}
			if !utf8.ValidString(tok) {
				t.Fatalf("token %d %+q not valid UTF-8", i, tok)
			}
			if j := bytes.IndexFunc([]byte(tok), unicode.IsSpace); j >= 0 {
				t.Fatalf("token %d %+q holds whitespace", i, tok)
			}
		}
		tk.Tokenize(&ts, text)
		var fresh Tokens
		tk.Tokenize(&fresh, text)
		if again, other := tokStrings(&ts), tokStrings(&fresh); !reflect.DeepEqual(again, first) || !reflect.DeepEqual(other, first) {
			t.Fatalf("not deterministic: %q, then %q, fresh %q", first, again, other)
		}

		ascii := bytes.Clone(text)
		for i := range ascii {
			ascii[i] &= 0x7f
		}
		if msg := tokCompareASCII(ascii); msg != "" {
			t.Fatal(msg)
		}
		if msg := tokCompareHybrid(text); msg != "" {
			t.Fatal(msg)
		}
		// The incremental path, in chunks of 1 to 8 bytes, gives the
		// tokens of the whole-text path.
		want := tokRefTokenize(set, text)
		small := &Tokenizer{s: set, chunk: 1 + len(text)%8}
		small.Tokenize(&ts, text)
		if got := tokStrings(&ts); !reflect.DeepEqual(got, want) && !(len(got) == 0 && len(want) == 0) {
			t.Fatalf("chunk %d: %+q, whole-text path %+q", small.chunk, got, want)
		}
		if !reflect.DeepEqual(first, want) && !(len(first) == 0 && len(want) == 0) {
			t.Fatalf("%+q, whole-text path %+q", first, want)
		}
	})
}
