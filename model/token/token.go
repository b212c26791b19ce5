package token

import (
	"bytes"
	"encoding/binary"
	"slices"
	"unicode"
	"unicode/utf8"

	"github.com/rivo/uniseg"
	"golang.org/x/text/cases"
	"golang.org/x/text/transform"
	"golang.org/x/text/unicode/norm"
)

// Placeholder tokens. Each stands for a whole URL, e-mail address, @handle
// or number when placeholders are on (Settings.NoPlaceholders
// false). They are spelt with angle brackets because no input text can
// produce them: "<" and ">" are tokens of their own and never part of a
// word.
const (
	PlaceholderURL    = "<url>"
	PlaceholderEmail  = "<email>"
	PlaceholderHandle = "<handle>"
	PlaceholderNumber = "<num>"
)

// Tokenizer cuts text into tokens per its settings. It is read-only and safe
// for concurrent use; the per-call storage is the caller's Tokens.
//
// The steps, in order:
//
//  0. With Settings.DropEscapes, terminal escape sequences (ECMA-48 CSI
//     and OSC, see Settings) are removed.
//  1. Clean-up: every run of invalid UTF-8 bytes becomes one U+FFFD; the
//     typographic apostrophes U+2018 and U+2019 become "'"; the
//     characters that Unicode's NFKC_Casefold removes (default ignorables
//     such as variation selectors, the soft hyphen, bidi controls, U+FEFF)
//     are removed, so "❤️" and "❤" are one token. Kept are U+200B ZERO
//     WIDTH SPACE (it separates words), U+200D ZERO WIDTH JOINER and the tag
//     characters U+E0020..U+E007F, which emoji sequences need.
//  2. Normalisation: NFKC, Unicode full case folding (CaseFolding.txt
//     status C and F, so "ß" and "ẞ" become "ss", "İ" becomes "i" + U+0307,
//     and no Turkic special-casing), then NFKC again, because folding may
//     leave text that is not in NFKC. Together with step 1 this is
//     Unicode's toNFKC_Casefold except for the characters kept above.
//     Fullwidth letters and digits become ASCII, "ﬁ" becomes "fi". All
//     Unicode data is version 15.0.0.
//  3. Placeholders (unless NoPlaceholders): found on the normalised text
//     before word segmentation, left to right, never overlapping:
//     - URL ("<url>"): a scheme of two or more characters followed by
//     "://" and at least one letter or digit ("https://…", "ftp://…"), or
//     "www." followed by a letter or digit where "www" does not continue
//     a word. It runs to the next whitespace, ASCII control or one of
//     `"<>\^{|}` and backtick, or non-ASCII character that is not a letter,
//     digit or mark; trailing `.,;:!?'*` and unbalanced ")" or "]" are
//     left out.
//     - e-mail address ("<email>"): local@domain, the local part of letters,
//     digits and "._%+-" (not ending in "."), the domain two or more
//     dot-separated labels of letters, digits and "-", the last label at
//     least two letters.
//     - handle ("<handle>"): "@" not preceded by a letter, digit, "_" or
//     "@", then letters, digits and "_", at least one of them not a digit
//     ("@10" is not a handle); "@name@host.domain" (federated) is one handle.
//  4. Words: the rest is cut at the word boundaries of Unicode UAX #29
//     (github.com/rivo/uniseg). A segment with a letter, or with a number
//     that is not a decimal digit, is a word token. A segment of decimal
//     digits with the separators UAX #29 keeps inside numbers ("1,000.5",
//     "3.14", "1_000") is a number: "<num>" with placeholders, else kept
//     as it is. Letters and digits together ("10am", "x2") are a word.
//     Times are not special: "10:30" is two numbers, because ":" does not
//     join digits in UAX #29. A segment of symbols (emoji, currency and
//     maths signs, private-use and unassigned characters, U+FFFD) is a
//     token; emoji sequences that UAX #29 keeps together (ZWJ sequences,
//     skin tones, flag pairs, keycaps) are one token. Punctuation segments
//     are dropped unless KeepPunct, each punctuation mark then its own
//     token ("..." is three). Whitespace, controls, format characters and
//     lone combining marks are never tokens.
//
// Ideographs and hiragana are one token per character (UAX #29 has no
// dictionary); katakana runs stay together. At most Settings().Limit()
// tokens are taken from a text; the rest of it is ignored. Tokens are
// never empty and always valid UTF-8.
//
// ASCII text takes a fast path (its own word segmenter, ASCII lower-casing,
// no normalisation) that gives exactly the tokens of the general path. The
// general path cuts words with the same ASCII segmenter wherever its
// decision involves only ASCII characters, and with uniseg elsewhere.
// Tests compare both with uniseg alone.
//
// The zero Tokenizer has the zero (default) settings.
type Tokenizer struct {
	s     Settings
	chunk int // bytes taken at a time; 0: tokFirstChunk growing to tokChunk (tests set it small)
}

// caseFold is Unicode full case folding; x/text documents it as stateless
// and safe for concurrent use.
var caseFold transform.SpanningTransformer = func() *cases.Caser {
	c := cases.Fold()
	return &c
}()

// New returns a tokenizer with settings s.
func New(s Settings) *Tokenizer { return &Tokenizer{s: s} }

// Settings returns the tokenizer's settings.
func (t *Tokenizer) Settings() Settings { return t.s }

// Tokens is reusable storage for one record's tokens. The zero value is
// empty and ready to use. Token i is valid until the next Tokenize or Reset.
// A Tokens must not be used by two goroutines at once.
type Tokens struct {
	buf  []byte
	ends []int32

	// Scratch of the incremental normalisation (see Tokenize): cleaned
	// text not yet normalised (a), the first NFKC (b), folded text not yet
	// normalised again (c), normalised text not yet cut into tokens (w),
	// the placeholder spans of a piece.
	a, b, c, w []byte
	spans      []span
	iter       *norm.Iter
	e          []byte // the text without its escape sequences (Settings.DropEscapes)
}

// Len is the number of tokens.
func (ts *Tokens) Len() int { return len(ts.ends) }

// At returns token i; the slice aliases ts and must not be kept.
func (ts *Tokens) At(i int) []byte {
	start := int32(0)
	if i > 0 {
		start = ts.ends[i-1]
	}
	return ts.buf[start:ts.ends[i]:ts.ends[i]]
}

// Reset empties ts, keeping its storage.
func (ts *Tokens) Reset() { ts.buf, ts.ends = ts.buf[:0], ts.ends[:0] }

func (ts *Tokens) add(tok []byte) {
	ts.buf = append(ts.buf, tok...)
	ts.ends = append(ts.ends, int32(len(ts.buf)))
}

func (ts *Tokens) addString(tok string) {
	ts.buf = append(ts.buf, tok...)
	ts.ends = append(ts.ends, int32(len(ts.buf)))
}

// The tokenizer takes about tokFirstChunk input bytes first, a whole chat
// line, then twice as many each time up to tokChunk: a huge record in
// pieces, and little work past the limit even where a few bytes give many
// tokens (U+FDFA).
const (
	tokFirstChunk = 256
	tokChunk      = 4096
)

// chunkSizes are the first and the largest chunk.
func (t *Tokenizer) chunkSizes() (int, int) {
	if t.chunk > 0 {
		return t.chunk, t.chunk
	}
	return tokFirstChunk, tokChunk
}

// Tokenize replaces the contents of ts by the tokens of text, at most
// Settings().Limit() of them. Invalid UTF-8 is replaced by U+FFFD. text is
// not modified or kept. After warm-up (storage grown to the longest piece
// seen) it allocates nothing.
//
// The text is taken in chunks (tokFirstChunk bytes growing to tokChunk),
// each normalised up to its last normalisation boundary, and the
// normalised text is cut into tokens up to its last stop character (see
// isStop), where neither a placeholder nor a word can continue; the rest
// waits for the next chunk. Once the limit is reached the rest of the text
// is not looked at, so a record costs a scan for non-ASCII bytes plus work
// and memory for the part that gives its tokens. A stretch without a stop character (one very long word, a
// run of ideographs without spaces or punctuation, a run of combining
// marks without a starter) is normalised whole before it is cut.
func (t *Tokenizer) Tokenize(ts *Tokens, text []byte) {
	if t.s.DropEscapes && hasEscape(text) {
		// The whole text, copied once; only texts with escapes pay.
		ts.e = dropEscapes(ts.e[:0], text)
		text = ts.e
	}
	if isASCII(text) {
		t.tokenizeASCII(ts, text)
		return
	}
	t.tokenizeFast(ts, text)
}

// tokenizeASCII is the fast path for ASCII text.
func (t *Tokenizer) tokenizeASCII(ts *Tokens, text []byte) {
	ts.Reset()
	limit := t.s.Limit()
	chunk, most := t.chunkSizes()
	for len(text) > 0 && ts.Len() < limit {
		n := len(text)
		if n > chunk {
			n = stopCut(text, chunk)
		}
		chunk = min(2*chunk, most)
		ts.a = appendLowerASCII(ts.a[:0], text[:n])
		t.tokenizeNormal(ts, ts.a, cutASCII)
		text = text[n:]
	}
}

// tokenizeGeneral is the path for any text, with word segmenter mode; on
// ASCII text it gives the same tokens as tokenizeASCII, and every mode
// gives the same tokens.
func (t *Tokenizer) tokenizeGeneral(ts *Tokens, text []byte, mode int) {
	ts.Reset()
	t.appendGeneral(ts, text, mode)
}

// appendGeneral is tokenizeGeneral without the Reset: it appends the
// tokens of text to ts, up to the limit.
func (t *Tokenizer) appendGeneral(ts *Tokens, text []byte, mode int) {
	ts.a, ts.c, ts.w = ts.a[:0], ts.c[:0], ts.w[:0]
	limit := t.s.Limit()
	if ts.Len() >= limit {
		return
	}
	chunk, most := t.chunkSizes()
	for ts.Len() < limit {
		n := len(text)
		if n > chunk {
			n = runeCut(text, chunk)
		}
		chunk = min(2*chunk, most)
		end := n == len(text)
		carried := len(ts.w)
		ts.normalizeChunk(text[:n], end)
		text = text[n:]
		q := len(ts.w)
		if !end {
			if q = lastStop(ts.w, carried); q == 0 {
				continue
			}
		}
		t.tokenizeNormal(ts, ts.w[:q], mode)
		if end {
			return
		}
		ts.w = ts.w[:copy(ts.w, ts.w[q:])]
	}
}

// normalizeChunk applies the clean-up and normalisation steps to the next
// chunk of a text, which must end before an ASCII byte or the first byte
// of a valid UTF-8 encoding (or at the end of the text: end), and appends
// to ts.w what of the normalised text is final. Each normalisation takes
// its input up to the last normalisation boundary and keeps the rest for
// the next chunk; end flushes everything. Case folding maps each
// character on its own and needs no carry.
func (ts *Tokens) normalizeChunk(chunk []byte, end bool) {
	carried := len(ts.a)
	ts.a = cleanUp(ts.a, chunk)
	cut := len(ts.a)
	if !end {
		cut = lastBoundary(ts.a, carried)
	}
	s := ts.a[:cut]
	if n := norm.NFKC.QuickSpan(s); n < len(s) {
		ts.b = ts.appendNFKC(ts.b[:0], s, n)
		s = ts.b
	}
	carried = len(ts.c)
	var folded bool
	ts.c, folded = appendFold(ts.c, s)
	ts.a = ts.a[:copy(ts.a, ts.a[cut:])]

	cut = len(ts.c)
	if !end {
		cut = lastBoundary(ts.c, carried)
	}
	s = ts.c[:cut]
	// Text that folding left unchanged, with nothing carried before it,
	// is the first NFKC's output and needs no second.
	if !folded && carried == 0 {
		ts.w = append(ts.w, s...)
	} else if n := norm.NFKC.QuickSpan(s); n < len(s) {
		ts.w = ts.appendNFKC(ts.w, s, n)
	} else {
		ts.w = append(ts.w, s...)
	}
	ts.c = ts.c[:copy(ts.c, ts.c[cut:])]
}

// lastBoundary is the start of the last character of valid UTF-8 s before
// which NFKC has a boundary, or 0: s[:i] and s[i:] normalise on their
// own. s[:from] is known to hold no boundary after its start, so the
// search stops there (a long run of marks is not searched again for every
// chunk).
func lastBoundary(s []byte, from int) int {
	for i := len(s); i > from; {
		_, n := utf8.DecodeLastRune(s[:i])
		i -= n
		if i > 0 && boundaryBefore(s[i:]) {
			return i
		}
	}
	return 0
}

// boundaryBefore reports whether NFKC has a boundary before the first
// character of s: it is a starter that never combines with what precedes
// it, and so is the first character of its decomposition. x/text reports
// a boundary before the Hangul compatibility jamo U+3133..U+3163 and
// U+FFA3..U+FFDC that decompose to vowel or trailing jamo, yet composes
// them with a preceding syllable ("\uAC00\u3135" is U+AC05), which moves
// where it inserts U+034F into a long run of marks after them (UAX #15
// stream-safe format).
func boundaryBefore(s []byte) bool {
	if s[0] < utf8.RuneSelf {
		return true
	}
	p := norm.NFKC.Properties(s)
	if !p.BoundaryBefore() {
		return false
	}
	d := p.Decomposition()
	return d == nil || norm.NFKC.Properties(d).BoundaryBefore()
}

// runeCut is where a chunk of about n bytes of text (n < len(text)) may
// end for the clean-up step: before an ASCII byte or the first byte of a
// valid encoding, so that no character and no run of invalid bytes is
// split. It is len(text) when there is no such place.
func runeCut(text []byte, n int) int {
	ok := func(i int) bool {
		if text[i] < utf8.RuneSelf {
			return true
		}
		r, size := utf8.DecodeRune(text[i:])
		return r != utf8.RuneError || size > 1
	}
	for i := n; i > 0; i-- {
		if ok(i) {
			return i
		}
	}
	for i := n + 1; i < len(text); i++ {
		if ok(i) {
			return i
		}
	}
	return len(text)
}

// isStop reports whether normalised text s may be cut into tokens before
// s[q] (0 < q < len(s)) as two texts: s[:q] and s[q:] give the tokens of
// s. The stop characters are whitespace, the ASCII characters that no URL
// holds (`<>\^{|}` and backtick) and the ideographic comma, full stop and
// corner brackets (U+3001, U+3002, U+300C, U+300D). None is a letter,
// digit, mark or part of a placeholder, so every placeholder rule and
// every look-back or look-ahead of one stops at it; none is Extend,
// Format, ZWJ, MidLetter, MidNum or MidNumLet in UAX #29, so no word rule
// looks past it, and UAX #29 has a word boundary before it except for a
// space after a space (WB3d) and LF after CR (WB3).
func isStop(s []byte, q int) bool {
	switch s[q] {
	case ' ':
		// uniseg joins a space to a space before it also across Extend,
		// Format and ZWJ characters (" \u200d " is one segment), so a
		// space after one of those is no stop either.
		r, _ := utf8.DecodeLastRune(s[:q])
		return !unicode.Is(wsegSpace, r) && !wordExtend(r)
	case '\n':
		return s[q-1] != '\r'
	case '\t', '\v', '\f', '\r', '<', '>', '\\', '^', '`', '{', '|', '}':
		return true
	case 0xE3:
		return q+2 < len(s) && s[q+1] == 0x80 &&
			(s[q+2] == 0x81 || s[q+2] == 0x82 || s[q+2] == 0x8C || s[q+2] == 0x8D)
	}
	return false
}

// wsegSpace is Word_Break=WSegSpace (WordBreakProperty.txt, Unicode 15.0.0).
var wsegSpace = &unicode.RangeTable{R16: []unicode.Range16{
	{0x0020, 0x0020, 1}, {0x1680, 0x1680, 1}, {0x2000, 0x2006, 1}, {0x2008, 0x200A, 1},
	{0x205F, 0x205F, 1}, {0x3000, 0x3000, 1},
}}

// wordExtend reports whether r may be Extend, Format or ZWJ in UAX #29
// (WordBreakProperty.txt: Grapheme_Extend, spacing marks, emoji
// modifiers; Format is Cf but for a few): any mark, any Cf, U+1F3FB..U+1F3FF
// and the halfwidth sound marks U+FF9E, U+FF9F. It may say yes for a
// character that is none of these; a stop is then missed, never made.
func wordExtend(r rune) bool {
	return unicode.In(r, unicode.M, unicode.Cf) || r >= 0x1F3FB && r <= 0x1F3FF || r == 0xFF9E || r == 0xFF9F
}

// lastStop is the last q at which isStop(s, q), or 0; s[:from] is known
// to hold none after its start.
func lastStop(s []byte, from int) int {
	for q := len(s) - 1; q >= max(from, 1); q-- {
		if isStop(s, q) {
			return q
		}
	}
	return 0
}

// stopCut is where the first piece of ASCII text (longer than n) ends: the
// last stop at or before n, else the first after it, else len(text).
func stopCut(text []byte, n int) int {
	if q := lastStop(text[:n+1], 0); q > 0 {
		return q
	}
	for q := n + 1; q < len(text); q++ {
		if isStop(text, q) {
			return q
		}
	}
	return len(text)
}

// appendFold appends the full case folding of s to dst and reports whether
// it differs from s. Case folding maps each character on its own, so ASCII
// is folded here by table and only runs of other characters go to x/text,
// whose folding is slow on ASCII.
func appendFold(dst, s []byte) ([]byte, bool) {
	changed := false
	for i := 0; i < len(s); {
		if c := s[i]; c < utf8.RuneSelf {
			if c-'A' < 26 {
				c += 'a' - 'A'
				changed = true
			}
			dst = append(dst, c)
			i++
			continue
		}
		j := i + 1
		for j < len(s) && s[j] >= utf8.RuneSelf {
			j++
		}
		run := s[i:j]
		if n, _ := caseFold.Span(run, true); n == len(run) {
			dst = append(dst, run...)
		} else {
			// Full folding at most triples the bytes (U+0390 -> U+03B9
			// U+0308 U+0301); with that room, Append does not allocate.
			n := len(dst)
			dst, _, _ = transform.Append(caseFold, slices.Grow(dst, 3*len(run)), run)
			fixCherokee(dst[n:])
			changed = true
		}
		i = j
	}
	return dst, changed
}

// appendNFKC appends NFKC(src) to dst, given n = norm.NFKC.QuickSpan(src):
// src[:n] is normal and ends at a normalisation boundary. It uses ts's
// norm.Iter rather than norm.Form.Append, which allocates its reordering
// buffer per call.
func (ts *Tokens) appendNFKC(dst, src []byte, n int) []byte {
	dst = append(dst, src[:n]...)
	if ts.iter == nil {
		ts.iter = new(norm.Iter)
	}
	ts.iter.Init(norm.NFKC, src[n:])
	for !ts.iter.Done() {
		dst = append(dst, ts.iter.Next()...)
	}
	return dst
}

// fixCherokee corrects, in place, x/text's case folding of Cherokee
// (golang/go#46101: it folds the capitals U+13A0..U+13F5 to the small
// letters, the reverse of CaseFolding.txt, which folds small to capital
// since Unicode 8.0). After folding, any small letter is mapped to its
// capital. Both are 3 bytes in UTF-8.
func fixCherokee(s []byte) {
	for i := 0; i+2 < len(s); i++ {
		switch s[i] {
		case 0xEA: // U+AB70..U+ABBF small letters: EA AD B0..EA AE BF
			r, _ := utf8.DecodeRune(s[i:])
			if r >= 0xAB70 && r <= 0xABBF {
				utf8.EncodeRune(s[i:], r-0xAB70+0x13A0)
				i += 2
			}
		case 0xE1: // U+13F8..U+13FD small letters: E1 8F B8..E1 8F BD
			if s[i+1] == 0x8F && s[i+2] >= 0xB8 && s[i+2] <= 0xBD {
				s[i+2] -= 8
				i += 2
			}
		}
	}
}

// tokenizeNormal appends the tokens of normalised text s to ts, cutting
// words with segmenter mode.
func (t *Tokenizer) tokenizeNormal(ts *Tokens, s []byte, mode int) {
	limit := t.s.Limit()
	if t.s.NoPlaceholders {
		t.words(ts, s, mode, limit)
		return
	}
	ts.spans = findSpans(ts.spans[:0], s)
	pos := 0
	for _, sp := range ts.spans {
		if !t.words(ts, s[pos:sp.start], mode, limit) {
			return
		}
		ts.addString(sp.kind)
		if ts.Len() >= limit {
			return
		}
		pos = sp.end
	}
	t.words(ts, s[pos:], mode, limit)
}

// words appends the tokens of the word segments of s to ts and reports
// whether there is room for more.
func (t *Tokenizer) words(ts *Tokens, s []byte, mode int, limit int) bool {
	if ts.Len() >= limit {
		return false
	}
	wc := wordCutter{rest: s, state: -1, mode: mode}
	for {
		seg, kind := wc.next()
		switch kind {
		case segEnd:
			return true
		case segDrop:
			continue
		}
		seg = seg[wc.lead:]
		switch kind {
		case segPunct:
			if !t.s.KeepPunct {
				continue
			}
			ts.add(seg)
		case segNumber:
			if t.s.NoPlaceholders {
				ts.add(seg)
			} else {
				ts.addString(PlaceholderNumber)
			}
		default:
			ts.add(seg)
		}
		if ts.Len() >= limit {
			return false
		}
	}
}

// Word segmenter modes of a wordCutter.
const (
	cutASCII  = iota // asciiWord alone, for ASCII text
	cutHybrid        // asciiWord where its decision sees only ASCII, else uniseg
	cutUniseg        // uniseg alone: the reference the others are tested against
	cutFast          // fastWord alone, for the fast path's checked pieces
)

// wordCutter cuts text into its UAX #29 word segments.
type wordCutter struct {
	rest  []byte
	state int // uniseg's state; -1 at the start of text or after asciiWord
	mode  int
	lead  int // bytes of leading whitespace in the last segment
}

// next returns the next segment and what it becomes (segEnd, with a nil
// segment, at the end of the text). A token made of it must leave out
// w.lead bytes of leading whitespace, which UAX #29 rule WB4 may attach to
// a segment (" " + U+1F3FD is one).
func (w *wordCutter) next() ([]byte, int) {
	if len(w.rest) == 0 {
		return nil, segEnd
	}
	if w.mode == cutFast {
		n, kind := fastWord(w.rest)
		seg := w.rest[:n]
		w.rest, w.state, w.lead = w.rest[n:], -1, 0
		return seg, kind
	}
	if w.mode == cutASCII || w.mode == cutHybrid && w.rest[0] < utf8.RuneSelf {
		n, kind := asciiWord(w.rest)
		// asciiWord's decision stands if it saw only ASCII: the byte that
		// ended the segment and, after a MidLetter, MidNum or MidNumLet,
		// the byte after it (rules WB6, WB7, WB11, WB12 look that far; a
		// non-ASCII one might be Extend or Format and WB4 skip it).
		if w.mode == cutASCII || n == len(w.rest) || w.rest[n] < utf8.RuneSelf &&
			(!isMid(asciiWB[w.rest[n]]) || n+1 == len(w.rest) || w.rest[n+1] < utf8.RuneSelf) {
			seg := w.rest[:n]
			w.rest, w.state, w.lead = w.rest[n:], -1, 0
			return seg, kind
		}
	}
	var seg []byte
	seg, w.rest, w.state = uniseg.FirstWord(w.rest, w.state)
	var kind int
	kind, w.lead = classify(seg)
	return seg, kind
}

func isMid(wb uint8) bool { return wb == wbMidLetter || wb == wbMidNum || wb == wbMidNumLet }

// isASCII reports whether b has no byte above 0x7f.
func isASCII(b []byte) bool {
	for len(b) >= 8 {
		if binary.LittleEndian.Uint64(b)&0x8080808080808080 != 0 {
			return false
		}
		b = b[8:]
	}
	for _, c := range b {
		if c >= utf8.RuneSelf {
			return false
		}
	}
	return true
}

// appendLowerASCII appends b with A-Z lowered; for ASCII this is what NFKC
// and full case folding do.
func appendLowerASCII(dst, b []byte) []byte {
	n := len(dst)
	dst = append(dst, b...)
	for i, c := range dst[n:] {
		if c-'A' < 26 {
			dst[n+i] = c + 'a' - 'A'
		}
	}
	return dst
}

// cleanUp appends src to dst with step 1 of the Tokenizer applied.
func cleanUp(dst, src []byte) []byte {
	for i := 0; i < len(src); {
		c := src[i]
		if c < utf8.RuneSelf {
			dst = append(dst, c)
			i++
			continue
		}
		r, n := utf8.DecodeRune(src[i:])
		switch {
		case r == utf8.RuneError && n == 1:
			dst = append(dst, "\uFFFD"...)
			for i++; i < len(src) && src[i] >= utf8.RuneSelf; i++ {
				if r, n := utf8.DecodeRune(src[i:]); r != utf8.RuneError || n != 1 {
					break
				}
			}
			continue
		case r == '\u2018' || r == '\u2019':
			dst = append(dst, '\'')
		case ignorable(r):
		default:
			dst = append(dst, src[i:i+n]...)
		}
		i += n
	}
	return dst
}

// ignorable reports whether r is one of the characters that NFKC_Casefold
// maps to nothing (DerivedNormalizationProps.txt, Unicode 15.0.0), other
// than U+200B ZERO WIDTH SPACE (a word separator), U+200D ZERO WIDTH JOINER
// and the tag characters U+E0020..U+E007F (parts of emoji sequences).
func ignorable(r rune) bool {
	switch {
	case r < 0xAD:
		return false
	case r < 0x2000:
		return r == 0xAD || r == 0x34F || r == 0x61C || r == 0x115F || r == 0x1160 ||
			r == 0x17B4 || r == 0x17B5 || r >= 0x180B && r <= 0x180F
	case r < 0x3000:
		return r == 0x200C || r == 0x200E || r == 0x200F || r >= 0x202A && r <= 0x202E ||
			r >= 0x2060 && r <= 0x206F
	case r < 0x10000:
		return r == 0x3164 || r >= 0xFE00 && r <= 0xFE0F || r == 0xFEFF || r == 0xFFA0 ||
			r >= 0xFFF0 && r <= 0xFFF8
	}
	return r >= 0x1BCA0 && r <= 0x1BCA3 || r >= 0x1D173 && r <= 0x1D17A ||
		r >= 0xE0000 && r <= 0xE001F || r >= 0xE0080 && r <= 0xE0FFF
}

// Word_Break property values of ASCII characters (UAX #29, table 3).
// Single_Quote behaves as MidNumLet and Double_Quote as Other when there
// are no Hebrew letters, so ASCII needs neither.
const (
	wbOther = iota
	wbCR
	wbLF
	wbNewline
	wbWSegSpace
	wbALetter
	wbNumeric
	wbMidLetter
	wbMidNum
	wbMidNumLet
	wbExtendNumLet
)

// asciiWB holds the Word_Break property of each ASCII byte, per
// WordBreakProperty.txt of Unicode 15.0.0.
var asciiWB = func() (t [256]uint8) {
	for c := 'A'; c <= 'Z'; c++ {
		t[c], t[c+'a'-'A'] = wbALetter, wbALetter
	}
	for c := '0'; c <= '9'; c++ {
		t[c] = wbNumeric
	}
	t['\r'], t['\n'], t['\v'], t['\f'] = wbCR, wbLF, wbNewline, wbNewline
	t[' '] = wbWSegSpace
	t[':'] = wbMidLetter
	t[','], t[';'] = wbMidNum, wbMidNum
	t['.'], t['\''] = wbMidNumLet, wbMidNumLet
	t['_'] = wbExtendNumLet
	return t
}()

// asciiWord is the length of the first UAX #29 word segment of ASCII text
// b (not empty), as if b were the whole text, and what the segment becomes
// (as classify would say). It implements the rules that can apply to
// ASCII: WB3 (CR × LF), WB3a/b, WB3d (runs of spaces), WB5 to WB13b;
// everything else breaks (WB999). A non-ASCII byte counts as Other.
func asciiWord(b []byte) (int, int) {
	c0 := asciiWB[b[0]]
	switch c0 {
	case wbCR:
		if len(b) > 1 && b[1] == '\n' {
			return 2, segDrop
		}
		return 1, segDrop
	case wbWSegSpace:
		i := 1
		for i < len(b) && b[i] == ' ' {
			i++
		}
		return i, segDrop
	case wbALetter, wbNumeric, wbExtendNumLet:
	default:
		return 1, int(asciiSeg[b[0]])
	}
	letters, digits := c0 == wbALetter, c0 == wbNumeric
	prev := c0
	i := 1
	for i < len(b) {
		c := asciiWB[b[i]]
		switch {
		case c == wbALetter || c == wbNumeric || c == wbExtendNumLet:
			// WB5, WB8, WB9, WB10, WB13a, WB13b
			letters = letters || c == wbALetter
			digits = digits || c == wbNumeric
			prev = c
			i++
			continue
		case prev == wbALetter && (c == wbMidLetter || c == wbMidNumLet) &&
			i+1 < len(b) && asciiWB[b[i+1]] == wbALetter:
			// WB6, WB7
			i += 2
			continue
		case prev == wbNumeric && (c == wbMidNum || c == wbMidNumLet) &&
			i+1 < len(b) && asciiWB[b[i+1]] == wbNumeric:
			// WB11, WB12
			i += 2
			continue
		}
		break
	}
	switch {
	case letters:
		return i, segToken
	case digits:
		return i, segNumber
	}
	return i, segPunct // underscores
}

// What a word segment becomes.
const (
	segEnd    = iota // no segment: end of text
	segDrop          // whitespace, controls, format characters, lone marks
	segPunct         // punctuation only
	segNumber        // decimal digits and number separators
	segToken         // a word or symbols: kept as it is
)

// Character kinds for classify, as bits.
const (
	ckLetter = 1 << iota // letters, and numbers other than decimal digits
	ckDigit              // decimal digits (Nd)
	ckSymbol             // symbols, private use, unassigned
	ckPunct              // punctuation
	ckKeycap             // U+20E3 COMBINING ENCLOSING KEYCAP
)

// asciiKind is the character kind of each ASCII byte by general category:
// letters, digits, symbols (Sm, Sc, Sk: $+<=>^`|~) and punctuation (P*).
var asciiKind = func() (t [256]uint8) {
	for c := 0; c < utf8.RuneSelf; c++ {
		switch r := rune(c); {
		case unicode.IsLetter(r):
			t[c] = ckLetter
		case unicode.IsDigit(r):
			t[c] = ckDigit
		case unicode.IsSymbol(r):
			t[c] = ckSymbol
		case unicode.IsPunct(r):
			t[c] = ckPunct
		}
	}
	return t
}()

// asciiSeg says what a segment of one ASCII byte becomes.
var asciiSeg = func() (t [256]uint8) {
	for c := range utf8.RuneSelf {
		t[c] = uint8(kindSeg(asciiKind[c]))
	}
	return t
}()

// classify says what word segment seg becomes, and where it starts once
// leading whitespace is trimmed.
func classify(seg []byte) (kind, start int) {
	k := uint8(0)
	lead := true
	for i := 0; i < len(seg); {
		c := seg[i]
		if c < utf8.RuneSelf {
			if lead && asciiWB[c] == wbWSegSpace {
				i++
				start = i
				continue
			}
			lead = false
			k |= asciiKind[c]
			i++
			continue
		}
		r, n := utf8.DecodeRune(seg[i:])
		i += n
		if lead && unicode.IsSpace(r) {
			start = i
			continue
		}
		lead = false
		k |= runeKind(r)
	}
	return kindSeg(k), start
}

// kindSeg says what a segment with the character kinds k becomes.
func kindSeg(k uint8) int {
	switch {
	case k&ckKeycap != 0:
		return segToken
	case k&ckLetter != 0:
		return segToken
	case k&ckDigit != 0:
		if k&ckSymbol != 0 {
			return segToken
		}
		return segNumber
	case k&(ckSymbol) != 0:
		return segToken
	case k&ckPunct != 0:
		return segPunct
	}
	return segDrop
}

// runeKind is the character kind of a non-ASCII rune.
func runeKind(r rune) uint8 {
	switch {
	case r == '\u20E3':
		return ckKeycap
	case unicode.IsLetter(r):
		return ckLetter
	case unicode.IsDigit(r):
		return ckDigit
	case unicode.IsNumber(r):
		return ckLetter
	case unicode.IsSymbol(r):
		return ckSymbol
	case unicode.IsPunct(r):
		return ckPunct
	case unicode.IsMark(r), unicode.IsSpace(r), unicode.IsControl(r), unicode.Is(unicode.Cf, r):
		return 0
	}
	return ckSymbol // private use, unassigned
}

// span is a placeholder's place in the normalised text.
type span struct {
	start, end int
	kind       string
}

// findSpans appends the placeholder spans of s, in order.
func findSpans(spans []span, s []byte) []span {
	// Next position of each anchor at or after pos, or len(s); recomputed
	// only when passed, so text without anchors costs three fast scans.
	colon, at, www := -1, -1, -1
	last := 0
	for pos := 0; pos < len(s); {
		if colon < pos {
			colon = indexFrom(s, pos, ':')
		}
		if at < pos {
			at = indexFrom(s, pos, '@')
		}
		if www < pos {
			www = len(s)
			if j := bytes.Index(s[pos:], []byte("www.")); j >= 0 {
				www = pos + j
			}
		}
		k := min(colon, at, www)
		if k == len(s) {
			break
		}
		var sp span
		ok := false
		switch {
		case k == colon:
			sp, ok = urlAtColon(s, k, last)
		case k == at:
			sp, ok = emailOrHandle(s, k, last)
		default:
			sp, ok = urlAtWWW(s, k)
		}
		if ok {
			spans = append(spans, sp)
			last, pos = sp.end, sp.end
		} else {
			pos = k + 1
		}
	}
	return spans
}

func indexFrom(s []byte, pos int, c byte) int {
	if j := bytes.IndexByte(s[pos:], c); j >= 0 {
		return pos + j
	}
	return len(s)
}

// urlAtColon finds a URL whose scheme ends at s[k] == ':', starting at or
// after last.
func urlAtColon(s []byte, k, last int) (span, bool) {
	if k+3 >= len(s) || s[k+1] != '/' || s[k+2] != '/' {
		return span{}, false
	}
	start := k
	for start > last && isSchemeByte(s[start-1]) {
		start--
	}
	for start < k && !isLowerASCII(s[start]) {
		start++
	}
	if k-start < 2 {
		return span{}, false
	}
	r, _ := utf8.DecodeRune(s[k+3:])
	if !isAlnum(r) {
		return span{}, false
	}
	return span{start, urlEnd(s, start, k+3), PlaceholderURL}, true
}

// urlAtWWW finds a URL starting with "www." at s[k]; the previous
// character must not be part of a word, host name or path.
func urlAtWWW(s []byte, k int) (span, bool) {
	if r, _ := utf8.DecodeLastRune(s[:k]); isAlnum(r) || r == '_' || r == '.' || r == '-' || r == '@' || r == '/' {
		return span{}, false
	}
	if k+4 >= len(s) {
		return span{}, false
	}
	if r, _ := utf8.DecodeRune(s[k+4:]); !isAlnum(r) {
		return span{}, false
	}
	return span{k, urlEnd(s, k, k+4), PlaceholderURL}, true
}

// urlEnd is the end of the URL that starts at start and whose body starts
// at i.
func urlEnd(s []byte, start, i int) int {
	for i < len(s) {
		c := s[i]
		if c < utf8.RuneSelf {
			if !urlASCII[c] {
				break
			}
			i++
			continue
		}
		r, n := utf8.DecodeRune(s[i:])
		if !isAlnum(r) && !unicode.IsMark(r) {
			break
		}
		i += n
	}
	// Leave out trailing punctuation, and closing brackets without an
	// opening one inside the URL.
	open := bytes.Count(s[start:i], []byte("(")) - bytes.Count(s[start:i], []byte(")"))
	square := bytes.Count(s[start:i], []byte("[")) - bytes.Count(s[start:i], []byte("]"))
	for i > start {
		switch s[i-1] {
		case '.', ',', ';', ':', '!', '?', '\'', '*':
			i--
			continue
		case ')':
			if open < 0 {
				open++
				i--
				continue
			}
		case ']':
			if square < 0 {
				square++
				i--
				continue
			}
		}
		break
	}
	return i
}

// urlASCII says which ASCII bytes may be inside a URL.
var urlASCII = func() (t [128]bool) {
	for c := '!'; c <= '~'; c++ {
		t[c] = true
	}
	for _, c := range "\"<>\\^`{|}" {
		t[c] = false
	}
	return t
}()

func isSchemeByte(c byte) bool {
	return isLowerASCII(c) || c >= '0' && c <= '9' || c == '+' || c == '-' || c == '.'
}

func isLowerASCII(c byte) bool { return c >= 'a' && c <= 'z' }

// isAlnum reports whether r is a letter or a digit (any script).
func isAlnum(r rune) bool {
	if r < utf8.RuneSelf {
		return asciiKind[r]&(ckLetter|ckDigit) != 0
	}
	return unicode.IsLetter(r) || unicode.IsDigit(r)
}

// emailOrHandle finds an e-mail address or a handle around s[k] == '@'.
func emailOrHandle(s []byte, k, last int) (span, bool) {
	// e-mail: local part backwards from k
	start := k
	for start > last {
		r, n := utf8.DecodeLastRune(s[last:start])
		if !isAlnum(r) && r != '.' && r != '_' && r != '%' && r != '+' && r != '-' {
			break
		}
		start -= n
	}
	for start < k && s[start] == '.' {
		start++
	}
	if start < k && s[k-1] != '.' {
		if end := domainEnd(s, k+1); end > 0 {
			return span{start, end, PlaceholderEmail}, true
		}
	}
	// handle
	if r, _ := utf8.DecodeLastRune(s[:k]); isAlnum(r) || r == '_' || r == '@' {
		return span{}, false
	}
	i, word := k+1, false
	for i < len(s) {
		r, n := utf8.DecodeRune(s[i:])
		if !isAlnum(r) && r != '_' {
			break
		}
		word = word || !unicode.IsDigit(r)
		i += n
	}
	if !word {
		return span{}, false
	}
	if i < len(s) && s[i] == '@' {
		if end := domainEnd(s, i+1); end > 0 {
			i = end
		}
	}
	return span{k, i, PlaceholderHandle}, true
}

// domainEnd is the end of the domain name starting at s[i], or 0 if there
// is none: two or more dot-separated labels of letters, digits and "-", the
// last of at least two letters.
func domainEnd(s []byte, i int) int {
	end, labels := 0, 0
	for {
		j, letters, n := i, true, 0
		for j < len(s) {
			r, size := utf8.DecodeRune(s[j:])
			if !isAlnum(r) && r != '-' {
				break
			}
			letters = letters && unicode.IsLetter(r)
			j += size
			n++
		}
		if n == 0 {
			break
		}
		labels++
		if labels >= 2 && letters && n >= 2 {
			end = j
		}
		if j+1 >= len(s) || s[j] != '.' {
			break
		}
		i = j + 1
	}
	return end
}
