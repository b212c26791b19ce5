package token

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"unicode/utf8"

	"golang.org/x/text/unicode/norm"
)

// Outside references: Debian's unicode-data package (version 15.0.0, the
// Unicode version of rivo/uniseg v0.4.7, golang.org/x/text v0.44.0 and Go's
// unicode package).
const (
	tokUnicodeVersion   = "15.0.0"
	tokWordBreakTest    = "/usr/share/unicode/auxiliary/WordBreakTest.txt"
	tokDerivedNormProps = "/usr/share/unicode/DerivedNormalizationProps.txt"
)

// tokReference opens an outside reference file whose first line must name
// Unicode tokUnicodeVersion. A missing or different file skips the test,
// or fails it when CI=true.
func tokReference(t *testing.T, path string) *os.File {
	t.Helper()
	miss := t.Skipf
	if os.Getenv("CI") == "true" {
		miss = t.Fatalf
	}
	f, err := os.Open(path)
	if err != nil {
		miss("reference missing (apt-get install unicode-data): %v", err)
		return nil
	}
	t.Cleanup(func() { f.Close() })
	first, _ := bufio.NewReader(f).ReadString('\n')
	if !strings.Contains(first, "-"+tokUnicodeVersion+".txt") {
		miss("%s is not Unicode %s: first line %q", path, tokUnicodeVersion, first)
		return nil
	}
	if _, err := f.Seek(0, 0); err != nil {
		t.Fatal(err)
	}
	return f
}

// tokSeed is the seed of the random test strings: 1, or env TOK_SEED.
func tokSeed(t *testing.T) uint64 {
	if v := os.Getenv("TOK_SEED"); v != "" {
		n, err := strconv.ParseUint(v, 10, 64)
		if err != nil {
			t.Fatalf("TOK_SEED: %v", err)
		}
		return n
	}
	return 1
}

// tokRounds is n, or a tenth of it with -short.
func tokRounds(n int) int {
	if testing.Short() {
		return n / 10
	}
	return n
}

func tokStrings(ts *Tokens) []string {
	out := make([]string, ts.Len())
	for i := range out {
		out[i] = string(ts.At(i))
	}
	return out
}

func tokenizeStrings(tk *Tokenizer, text string) []string {
	var ts Tokens
	tk.Tokenize(&ts, []byte(text))
	return tokStrings(&ts)
}

// cutWords is the segmentation layer alone: all word segments of s, cut
// with segmenter mode.
func cutWords(s []byte, mode int) []string {
	var out []string
	wc := wordCutter{rest: s, state: -1, mode: mode}
	for seg, kind := wc.next(); kind != segEnd; seg, kind = wc.next() {
		out = append(out, string(seg))
	}
	return out
}

// TestTokenizeWordBreakTest checks the word segmenter, before
// normalisation and token filtering, against every test line of the
// Unicode Consortium's WordBreakTest.txt for Unicode 15.0.0 (UAX #29): the
// general segmenters (rivo/uniseg alone, and the hybrid of our ASCII
// segmenter and uniseg that the tokenizer uses) on all lines, our ASCII
// segmenter alone on the lines whose code points are all ASCII (the others
// are outside its domain; the tokenizer never gives it such text).
func TestTokenizeWordBreakTest(t *testing.T) {
	f := tokReference(t, tokWordBreakTest)
	sc := bufio.NewScanner(f)
	lineNo, general, ascii := 0, 0, 0
	for sc.Scan() {
		lineNo++
		line, _, _ := strings.Cut(sc.Text(), "#")
		fields := strings.Fields(line)
		if len(fields) == 0 {
			continue
		}
		// "÷ 0041 × 0308 ÷ 0020 ÷": ÷ is a boundary, × is none.
		var text []byte
		var want []string
		var cur []byte
		isASCII := true
		for _, fld := range fields {
			switch fld {
			case "÷":
				if len(cur) > 0 {
					want = append(want, string(cur))
					cur = nil
				}
			case "×":
			default:
				r, err := strconv.ParseUint(fld, 16, 32)
				if err != nil {
					t.Fatalf("%s:%d: bad code point %q", tokWordBreakTest, lineNo, fld)
				}
				cur = utf8.AppendRune(cur, rune(r))
				text = utf8.AppendRune(text, rune(r))
				isASCII = isASCII && r < utf8.RuneSelf
			}
		}
		if len(cur) > 0 {
			t.Fatalf("%s:%d: line does not end with ÷", tokWordBreakTest, lineNo)
		}
		if got := cutWords(text, cutUniseg); !reflect.DeepEqual(got, want) {
			t.Errorf("%s:%d: uniseg segmenter: got %q, want %q", tokWordBreakTest, lineNo, got, want)
		}
		if got := cutWords(text, cutHybrid); !reflect.DeepEqual(got, want) {
			t.Errorf("%s:%d: hybrid segmenter: got %q, want %q", tokWordBreakTest, lineNo, got, want)
		}
		general++
		if isASCII {
			if got := cutWords(text, cutASCII); !reflect.DeepEqual(got, want) {
				t.Errorf("%s:%d: ASCII segmenter: got %q, want %q", tokWordBreakTest, lineNo, got, want)
			}
			ascii++
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	// WordBreakTest-15.0.0.txt has 1823 test lines, 477 of them ASCII.
	if general < 1800 || ascii < 470 {
		t.Fatalf("only %d test lines (%d ASCII) in %s", general, ascii, tokWordBreakTest)
	}
	t.Logf("Unicode %s WordBreakTest: %d lines uniseg and hybrid segmenters, %d lines ASCII segmenter", tokUnicodeVersion, general, ascii)
}

// tokNFKCCasefold reads the NFKC_Casefold (NFKC_CF) mapping from
// DerivedNormalizationProps.txt; code points not listed map to themselves.
func tokNFKCCasefold(t *testing.T) map[rune][]rune {
	f := tokReference(t, tokDerivedNormProps)
	m := map[rune][]rune{}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line, _, _ := strings.Cut(sc.Text(), "#")
		parts := strings.Split(line, ";")
		if len(parts) != 3 || strings.TrimSpace(parts[1]) != "NFKC_CF" {
			continue
		}
		lo, hi, _ := strings.Cut(strings.TrimSpace(parts[0]), "..")
		if hi == "" {
			hi = lo
		}
		a, err1 := strconv.ParseUint(lo, 16, 32)
		b, err2 := strconv.ParseUint(hi, 16, 32)
		if err1 != nil || err2 != nil {
			t.Fatalf("bad NFKC_CF line %q", sc.Text())
		}
		to := []rune{}
		for _, h := range strings.Fields(parts[2]) {
			r, err := strconv.ParseUint(h, 16, 32)
			if err != nil {
				t.Fatalf("bad NFKC_CF line %q", sc.Text())
			}
			to = append(to, rune(r))
		}
		for r := a; r <= b; r++ {
			m[rune(r)] = to
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if len(m) < 5000 {
		t.Fatalf("only %d NFKC_CF mappings read", len(m))
	}
	return m
}

// tokKeptIgnorable are the characters NFKC_Casefold removes but the
// tokenizer keeps (see the Tokenizer doc), and tokApostrophe those it maps
// to "'"; both are deliberate differences from toNFKC_Casefold.
func tokKeptIgnorable(r rune) bool { return r == 0x200B || r == 0x200D || r >= 0xE0020 && r <= 0xE007F }
func tokApostrophe(r rune) bool    { return r == 0x2018 || r == 0x2019 }

// toNFKCCasefold is Unicode's definition (Unicode 15.0.0 core
// specification, section 3.13, D145 and the NFKC_Casefold property): map
// each character by NFKC_CF, then normalise to NFC.
func toNFKCCasefold(m map[rune][]rune, s []rune) string {
	var out []rune
	for _, r := range s {
		switch to, ok := m[r]; {
		case tokKeptIgnorable(r):
			out = append(out, r)
		case tokApostrophe(r):
			out = append(out, '\'')
		case ok:
			out = append(out, to...)
		default:
			out = append(out, r)
		}
	}
	return norm.NFC.String(string(out))
}

// TestTokenizeNFKCCasefold checks the clean-up and normalisation steps
// against Unicode's NFKC_Casefold mapping (DerivedNormalizationProps.txt,
// Unicode 15.0.0): every code point alone, and random strings of
// characters that compose, decompose, fold or vanish.
func TestTokenizeNFKCCasefold(t *testing.T) {
	m := tokNFKCCasefold(t)
	var ts Tokens
	bad := 0
	for r := rune(0); r <= utf8.MaxRune; r++ {
		if r >= 0xD800 && r <= 0xDFFF {
			continue
		}
		in := []rune{r}
		want := toNFKCCasefold(m, in)
		if got := string(tokNormalize(&ts, []byte(string(in)), tokChunk)); got != want {
			if bad++; bad <= 20 {
				t.Errorf("U+%04X: normalised to %+q, NFKC_Casefold gives %+q", r, got, want)
			}
		}
	}
	// Strings of characters from the mapping and others that compose,
	// reorder or vanish. Unicode's toNFKC_Casefold maps character by
	// character, so it can give different results for canonically
	// equivalent strings ("\u1f98\u0301" and "\u1f9c": the iota subscript
	// U+0345 folds to a starter). The tokenizer normalises the string
	// first (NFKC, then folding), keeping such strings together; the
	// reference here is therefore toNFKC_Casefold(NFKC(s)).
	var pool []rune
	for r := range m {
		pool = append(pool, r)
	}
	slices.Sort(pool)
	pool = append(pool, 'a', 'e', 'o', 'w', 'A', 'I', 'W', ' ', '1', 0x301, 0x308, 0x30A, 0x327, 0x345, 0x1100, 0x1161, 0x11A8,
		0xAC00, 0x3099, 0x304B, 0x200D, 0x2019, 0xE0067, 0x1F98, 0x1F9C)
	rng := rand.New(rand.NewPCG(tokSeed(t), 2))
	for range tokRounds(20000) {
		in := make([]rune, 1+rng.IntN(8))
		for j := range in {
			in[j] = pool[rng.IntN(len(pool))]
		}
		want := toNFKCCasefold(m, []rune(norm.NFKC.String(string(in))))
		// Chunks of 1 to 4 bytes: the incremental normalisation at every
		// boundary it may cut at.
		if got := string(tokNormalize(&ts, []byte(string(in)), 1+rng.IntN(4))); got != want {
			if bad++; bad <= 20 {
				t.Errorf("%+q: normalised to %+q, toNFKC_Casefold(NFKC(s)) gives %+q", string(in), got, want)
			}
		}
	}
	if bad > 0 {
		t.Errorf("%d mismatches", bad)
	}
}

// tokNormalize runs the clean-up and normalisation steps over all of
// text, taken in chunks of about chunk bytes as Tokenize takes them, and
// returns the normalised text (in ts's storage).
func tokNormalize(ts *Tokens, text []byte, chunk int) []byte {
	ts.a, ts.c, ts.w = ts.a[:0], ts.c[:0], ts.w[:0]
	for {
		n := len(text)
		if n > chunk {
			n = runeCut(text, chunk)
		}
		ts.normalizeChunk(text[:n], n == len(text))
		if text = text[n:]; len(text) == 0 {
			return ts.w
		}
	}
}

// tokRefNormalize is the clean-up and normalisation steps applied to the
// whole text at once, as the tokenizer did before it worked in chunks:
// the reference for the incremental path.
func tokRefNormalize(text []byte) []byte {
	var ts Tokens
	s := cleanUp(nil, text)
	if n := norm.NFKC.QuickSpan(s); n < len(s) {
		s = ts.appendNFKC(nil, s, n)
	}
	f, changed := appendFold(nil, s)
	if changed {
		s = f
		if n := norm.NFKC.QuickSpan(s); n < len(s) {
			s = ts.appendNFKC(nil, s, n)
		}
	}
	return s
}

// tokRefTokenize is the tokenizer's whole-text path (normalise all, then
// find placeholders and words over all of it, stop at the limit): the
// reference the incremental Tokenize is compared with.
func tokRefTokenize(set Settings, text []byte) []string {
	tk := New(set)
	var ts Tokens
	if set.DropEscapes {
		text = dropEscapes(nil, text)
	}
	if isASCII(text) {
		tk.tokenizeNormal(&ts, appendLowerASCII(nil, text), cutASCII)
	} else {
		tk.tokenizeNormal(&ts, tokRefNormalize(text), cutHybrid)
	}
	return tokStrings(&ts)
}

type tokenizeCase struct {
	name string
	set  Settings
	in   string
	want []string
}

var (
	tokDefault = Settings{}
	tokPunct   = Settings{KeepPunct: true}
	tokRaw     = Settings{NoPlaceholders: true}
)

// tokenizeCases: expected tokens follow from the rules in the Tokenizer
// doc comment and the standards named per group. Invented ferry-service
// text; the .example domain is reserved for examples (RFC 2606).
var tokenizeCases = []tokenizeCase{
	// Placeholders: URL syntax per RFC 3986 (scheme "://" authority path
	// "?" query "#" fragment); our own rules for where a URL ends.
	{"url", tokDefault, "timetable at https://ferry.example/routes/varlo-osk?day=mon&dir=out#top now", []string{"timetable", "at", PlaceholderURL, "now"}},
	{"url upper case", tokDefault, "HTTPS://FERRY.EXAMPLE/A", []string{PlaceholderURL}},
	{"url trailing stop", tokDefault, "see http://ferry.example/a.", []string{"see", PlaceholderURL}},
	{"url trailing stop kept punct", tokPunct, "see http://ferry.example/a.", []string{"see", PlaceholderURL, "."}},
	{"url in brackets", tokPunct, "(map: https://isles.example/wiki/Osk_(island)).", []string{"(", "map", ":", PlaceholderURL, ")", "."}},
	{"url with port and user", tokDefault, "ftp://crew@depot.example:2121/logs", []string{PlaceholderURL}},
	{"url www", tokDefault, "book on www.ferry.example/tickets, thanks", []string{"book", "on", PlaceholderURL, "thanks"}},
	{"url www inside word", tokDefault, "awww.nice", []string{"awww.nice"}},
	{"url after label", tokDefault, "link:https://ferry.example", []string{"link", PlaceholderURL}},
	{"url needs host", tokPunct, "http:// nothing", []string{"http", ":", "/", "/", "nothing"}},
	{"url one-letter scheme", tokDefault, "c://dir", []string{"c", "dir"}},
	{"url unicode path", tokDefault, "https://ferry.example/höfn gone", []string{PlaceholderURL, "gone"}},
	{"url stops at ideographic stop", tokDefault, "https://ferry.example/a。好", []string{PlaceholderURL, "好"}},
	{"url off", tokRaw, "https://ferry.example/a?b=1", []string{"https", "ferry.example", "a", "b", "=", "1"}},
	// E-mail addresses: a subset of RFC 5322 addr-spec (dot-atom local
	// part, host-name domain); quoted local parts are not recognised.
	{"email", tokDefault, "write to mira.tolv+late@harbour.example today", []string{"write", "to", PlaceholderEmail, "today"}},
	{"email trailing stop", tokPunct, "mail crew_7@osk-ferries.example.", []string{"mail", PlaceholderEmail, "."}},
	{"email subdomain", tokDefault, "a.b@mail.isles.example", []string{PlaceholderEmail}},
	{"email needs dot", tokPunct, "ops@localhost", []string{"ops", "@", "localhost"}},
	{"email numeric tld", tokPunct, "x@10.0.0.1", []string{"x", "@", PlaceholderNumber}},
	{"email mailto", tokDefault, "mailto:desk@ferry.example", []string{"mailto", PlaceholderEmail}},
	{"email off", tokRaw, "desk@ferry.example", []string{"desk", "ferry.example"}},
	// Handles.
	{"handle", tokDefault, "thanks @skipper_orla!", []string{"thanks", PlaceholderHandle}},
	{"handle start", tokDefault, "@osk_port the 9 is late", []string{PlaceholderHandle, "the", PlaceholderNumber, "is", "late"}},
	{"handle federated", tokDefault, "@orla@isles.example hi", []string{PlaceholderHandle, "hi"}},
	{"handle digits only", tokPunct, "meet @10", []string{"meet", "@", PlaceholderNumber}},
	{"handle in word", tokPunct, "a@b", []string{"a", "@", "b"}},
	{"handle off", tokRaw, "@skipper_orla", []string{"skipper_orla"}},
	// Numbers: UAX #29 rules WB11/WB12 keep MidNum (",", ";") and
	// MidNumLet (".", "'") between digits, WB13a/b keep "_".
	{"integer", tokDefault, "pier 7 of 12", []string{"pier", PlaceholderNumber, "of", PlaceholderNumber}},
	{"decimal", tokDefault, "3.14 and 0.5", []string{PlaceholderNumber, "and", PlaceholderNumber}},
	{"thousands", tokDefault, "1,000.5 fares", []string{PlaceholderNumber, "fares"}},
	{"digit groups", tokDefault, "1'000 and 1_000", []string{PlaceholderNumber, "and", PlaceholderNumber}},
	{"time", tokPunct, "leaves 10:30", []string{"leaves", PlaceholderNumber, ":", PlaceholderNumber}},
	{"negative and percent", tokPunct, "-5 50%", []string{"-", PlaceholderNumber, PlaceholderNumber, "%"}},
	{"currency", tokDefault, "$20 or €15", []string{"$", PlaceholderNumber, "or", "€", PlaceholderNumber}},
	{"digits with letters", tokDefault, "10am 2nd x2", []string{"10am", "2nd", "x2"}},
	{"trailing stop", tokPunct, "gate 4.", []string{"gate", PlaceholderNumber, "."}},
	{"fullwidth digits", tokDefault, "１２３", []string{PlaceholderNumber}},
	{"arabic-indic digits", tokDefault, "٣٤", []string{PlaceholderNumber}},
	{"numbers off", tokRaw, "1,000.5 at 10:30", []string{"1,000.5", "at", "10", "30"}},
	// Case folding: CaseFolding.txt (Unicode 15.0.0) status C and F.
	{"fold ascii", tokDefault, "Ferry FERRY ferry", []string{"ferry", "ferry", "ferry"}},
	{"fold sharp s", tokDefault, "Straße STRASSE ẞ", []string{"strasse", "strasse", "ss"}}, // 00DF; F; 0073 0073 and 1E9E; F; 0073 0073
	{"fold dotted capital I", tokDefault, "İzmir", []string{"i\u0307zmir"}},                // 0130; F; 0069 0307
	{"fold capital I not turkic", tokDefault, "ISLAND ılık", []string{"island", "ılık"}},   // 0049; C; 0069 (the T entry is not used); ı has no folding
	{"fold greek sigma", tokDefault, "ΣΟΦΟΣ σοφος", []string{"σοφοσ", "σοφοσ"}},            // 03A3; C; 03C3 and 03C2; C; 03C3
	{"fold kelvin", tokDefault, "5\u212A", []string{"5k"}},                                 // 212A; C; 006B
	{"fold cherokee", tokDefault, "\u13A0\uAB70", []string{"\u13A0\u13A0"}},                // AB70; C; 13A0 (small folds to capital; golang/go#46101)
	{"fold then compose", tokDefault, "\u01F0 J\u030C", []string{"\u01F0", "\u01F0"}},      // 01F0; F; 006A 030C, recomposed by NFKC
	// NFKC: decompositions in UnicodeData.txt, composition per UAX #15.
	{"nfkc fullwidth", tokDefault, "ＦＥＲＲＹ ｏｋ", []string{"ferry", "ok"}},                          // FF26;<wide> 0046 ...
	{"nfkc fullwidth punct", tokPunct, "ｏｋ．", []string{"ok", "."}},                               // FF0E;<wide> 002E
	{"nfkc fullwidth handle", tokDefault, "＠ｏｒｌａ", []string{PlaceholderHandle}},                  // FF20;<wide> 0040
	{"nfkc ligature", tokDefault, "ﬁne ﬂow", []string{"fine", "flow"}},                           // FB01;<compat> 0066 0069
	{"nfkc compose", tokDefault, "cafe\u0301 café", []string{"café", "café"}},                    // 0065 0301 -> 00E9
	{"nfkc circled", tokDefault, "① ²", []string{PlaceholderNumber, PlaceholderNumber}},          // 2460;<circle> 0031, 00B2;<super> 0032
	{"nfkc square", tokDefault, "12㎞", []string{"12km"}},                                         // 339E;<square> 006B 006D
	{"nfkc nbsp and ideographic space", tokDefault, "a\u00A0b\u3000c", []string{"a", "b", "c"}},  // 00A0;<noBreak> 0020, 3000;<wide> 0020
	{"nfkc hangul", tokDefault, "\u1112\u1161\u11AB", []string{"\uD55C"}},                        // conjoining jamo compose to 한
	{"soft hyphen removed", tokDefault, "ferry\u00ADboat", []string{"ferryboat"}},                // 00AD; NFKC_CF; (empty)
	{"curly apostrophe", tokDefault, "can\u2019t \u2018quote\u2019", []string{"can't", "quote"}}, // our mapping
	// Emoji and symbols: UAX #29 WB3c (ZWJ × Extended_Pictographic), WB4
	// (modifiers and variation selectors are Extend), WB15/WB16 (regional
	// indicator pairs).
	{"emoji", tokDefault, "great trip 😀😀", []string{"great", "trip", "😀", "😀"}},
	{"emoji skin tone", tokDefault, "👍🏽 ok", []string{"👍🏽", "ok"}},
	{"emoji zwj family", tokDefault, "👨\u200d👩\u200d👧 aboard", []string{"👨\u200d👩\u200d👧", "aboard"}},
	{"emoji zwj profession", tokDefault, "🧑🏽\u200d✈\ufe0f", []string{"🧑🏽\u200d✈"}},
	{"emoji flags", tokDefault, "🇬🇷🇮🇹🇫", []string{"🇬🇷", "🇮🇹", "🇫"}},
	{"emoji tag flag", tokDefault, "\U0001F3F4\U000E0067\U000E0062\U000E0073\U000E0063\U000E0074\U000E007F!", []string{"\U0001F3F4\U000E0067\U000E0062\U000E0073\U000E0063\U000E0074\U000E007F"}},
	{"emoji variation selector", tokDefault, "❤️ ❤", []string{"❤", "❤"}},
	{"emoji keycap", tokDefault, "1️⃣ #️⃣", []string{"1\u20e3", "#\u20e3"}},
	{"symbols", tokDefault, "a+b=c < d ~ ©", []string{"a", "+", "b", "=", "c", "<", "d", "~", "©"}},
	{"private use", tokDefault, "\uE000", []string{"\uE000"}},
	// CJK: UAX #29 has no rule joining ideographs or hiragana (WB999);
	// katakana joins (WB13); hangul syllables are ALetter (WB5).
	{"cjk", tokDefault, "東京へ行く", []string{"東", "京", "へ", "行", "く"}},
	{"katakana", tokDefault, "フェリーに乗る", []string{"フェリー", "に", "乗", "る"}},
	{"hangul", tokDefault, "배를 타요", []string{"배를", "타요"}},
	{"cjk punct", tokPunct, "好。", []string{"好", "。"}},
	// Punctuation, whitespace, controls.
	{"punct dropped", tokDefault, "Hello, world... (really?!)", []string{"hello", "world", "really"}},
	{"punct kept", tokPunct, "Hi, all...", []string{"hi", ",", "all", ".", ".", "."}},
	{"apostrophe inside", tokDefault, "don't 'quote'", []string{"don't", "quote"}},
	{"whitespace", tokPunct, " \t\r\n\v\f  a \u2003 b\u0085", []string{"a", "b"}},
	{"controls", tokPunct, "a\x00b\x7fc\u200bd", []string{"a", "b", "c", "d"}},
	{"lone marks", tokPunct, "\u0301 \u0308", nil},
	{"empty", tokDefault, "", nil},
	{"only spaces", tokDefault, "   ", nil},
	// Invalid UTF-8: each run of bad bytes becomes one U+FFFD, a symbol.
	{"invalid utf-8", tokDefault, "ab\xffcd \xc3\x28 \xe2\x82", []string{"ab", "\uFFFD", "cd", "\uFFFD", "\uFFFD"}},
	{"invalid run", tokDefault, "\xff\xfe\xfd", []string{"\uFFFD"}},
	// Limit: Settings().Limit() tokens, placeholders counted.
	{"limit", Settings{MaxTokens: 3}, "one two three four five", []string{"one", "two", "three"}},
	{"limit placeholder", Settings{MaxTokens: 2}, "see https://ferry.example now", []string{"see", PlaceholderURL}},
	{"limit number", Settings{MaxTokens: 1}, "7 8 9", []string{PlaceholderNumber}},
}

func TestTokenize(t *testing.T) {
	for _, c := range tokenizeCases {
		t.Run(c.name, func(t *testing.T) {
			got := tokenizeStrings(New(c.set), c.in)
			if !reflect.DeepEqual(got, c.want) && !(len(got) == 0 && len(c.want) == 0) {
				t.Errorf("Tokenize(%+q) = %+q, want %+q", c.in, got, c.want)
			}
		})
	}
}

// TestTokenizeDefaultLimit: DefaultMaxTokens (400) tokens at most.
func TestTokenizeDefaultLimit(t *testing.T) {
	text := strings.Repeat("sail 7 https://ferry.example @orla ", 300)
	tk := New(Settings{})
	for _, general := range []bool{false, true} {
		var ts Tokens
		if general {
			tk.tokenizeGeneral(&ts, []byte(text), cutUniseg)
		} else {
			tk.Tokenize(&ts, []byte(text))
		}
		if ts.Len() != DefaultMaxTokens {
			t.Errorf("general=%v: %d tokens, want %d", general, ts.Len(), DefaultMaxTokens)
		}
	}
}

// TestTokenizeZeroValue: the zero Tokenizer and Tokens work, with the
// default settings.
func TestTokenizeZeroValue(t *testing.T) {
	var tk Tokenizer
	var ts Tokens
	for _, in := range []string{"Straße nach Øsk", "ASCII only"} {
		tk.Tokenize(&ts, []byte(in))
		if got, want := tokStrings(&ts), tokenizeStrings(New(Settings{}), in); !reflect.DeepEqual(got, want) {
			t.Errorf("zero Tokenizer: %q, want %q", got, want)
		}
	}
	if tk.Settings() != (Settings{}) || tk.Settings().Limit() != DefaultMaxTokens {
		t.Errorf("zero Tokenizer settings %+v", tk.Settings())
	}
}

// tokSettings are the settings the differential tests compare under.
var tokSettings = []Settings{
	{}, {KeepPunct: true}, {NoPlaceholders: true}, {KeepPunct: true, NoPlaceholders: true}, {MaxTokens: 3}, {KeepPunct: true, MaxTokens: 1},
}

// tokFragments build random ASCII text rich in the cases the segmenter,
// the placeholders and the classifier treat specially.
var tokFragments = []string{
	"a", "B", "z", "0", "9", "42", " ", "  ", ".", ",", ";", ":", "'", "\"", "_", "-", "@", "/", "//", "?", "#",
	"\r", "\n", "\r\n", "\t", "\v", "\f", "\x00", "\x7f", "(", ")", "[", "]", "$", "%", "+", "<", ">", "!", "&", "=",
	"*", "~", "^", "`", "|", "{", "}", "\\", "www.", "WWW.", "http://", "https://", "x.example", "ferry", "Osk",
	"mailto:", "1,000.5", "10:30", "can't", "e.g.", "@@",
}

func tokRandomASCII(rng *rand.Rand) string {
	var sb strings.Builder
	for n := rng.IntN(12); n >= 0; n-- {
		sb.WriteString(tokFragments[rng.IntN(len(tokFragments))])
	}
	return sb.String()
}

// tokCompareASCII reports how the fast path differs from the general path
// on ASCII text s, or "" when they agree: segments and their kinds, and
// tokens under every tokSettings.
func tokCompareASCII(s []byte) string {
	if got, want := cutWords(s, cutASCII), cutWords(s, cutUniseg); !reflect.DeepEqual(got, want) {
		return fmt.Sprintf("segments %+q: ASCII %q, uniseg %q", s, got, want)
	}
	for rest := s; len(rest) > 0; {
		n, kind := asciiWord(rest)
		if want, lead := classify(rest[:n]); kind != want || kind != segDrop && lead != 0 {
			return fmt.Sprintf("segment %+q: asciiWord says %d, classify %d (lead %d)", rest[:n], kind, want, lead)
		}
		rest = rest[n:]
	}
	var fast, general Tokens
	for _, set := range tokSettings {
		tk := New(set)
		tk.tokenizeASCII(&fast, s)
		for _, mode := range []int{cutUniseg, cutHybrid} {
			tk.tokenizeGeneral(&general, s, mode)
			if got, want := tokStrings(&fast), tokStrings(&general); !reflect.DeepEqual(got, want) {
				return fmt.Sprintf("%+v %+q: fast %q, general (mode %d) %q", set, s, got, mode, want)
			}
		}
	}
	return ""
}

// tokCompareHybrid reports how the hybrid segmenter differs from uniseg
// alone on text s, or "" when they agree: segments, and tokens under every
// tokSettings.
func tokCompareHybrid(s []byte) string {
	if got, want := cutWords(s, cutHybrid), cutWords(s, cutUniseg); !reflect.DeepEqual(got, want) {
		return fmt.Sprintf("segments %+q: hybrid %q, uniseg %q", s, got, want)
	}
	var a, b Tokens
	for _, set := range tokSettings {
		tk := New(set)
		tk.tokenizeGeneral(&a, s, cutHybrid)
		tk.tokenizeGeneral(&b, s, cutUniseg)
		if got, want := tokStrings(&a), tokStrings(&b); !reflect.DeepEqual(got, want) {
			return fmt.Sprintf("%+v %+q: hybrid %q, uniseg %q", set, s, got, want)
		}
	}
	return ""
}

// tokNonASCII are fragments next to which the hybrid segmenter must hand
// over to uniseg: Extend, Format and ZWJ (WB4), letters and digits of
// other scripts (WB5 to WB13), Hebrew letters (WB7a to WB7c), katakana
// (WB13), regional indicators (WB15, WB16), pictographs (WB3c) and
// non-ASCII spaces (WB3d).
var tokNonASCII = []string{
	"é", "́", "̈", "‍", "​", "­", "؀", "ß", "İ", "Ω", "٣", "５", "ａ", "א", "ד",
	"カ", "ー", "東", "🇦", "🇧", "👍", "🏽", "❤", " ", " ", "　", "", " ", "’", "️", "ÿ", "Ã",
	"．", "：", "，", "＠", "󠁧",
}

// TestTokenizeHybridDifferential: the hybrid segmenter the tokenizer uses
// cuts mixed text exactly as uniseg alone, and gives the same tokens.
func TestTokenizeHybridDifferential(t *testing.T) {
	rng := rand.New(rand.NewPCG(tokSeed(t), 6))
	for range tokRounds(10000) {
		var sb strings.Builder
		for n := rng.IntN(10); n >= 0; n-- {
			if rng.IntN(2) == 0 {
				sb.WriteString(tokNonASCII[rng.IntN(len(tokNonASCII))])
			} else {
				sb.WriteString(tokFragments[rng.IntN(len(tokFragments))])
			}
		}
		if msg := tokCompareHybrid([]byte(sb.String())); msg != "" {
			t.Fatal(msg)
		}
	}
	for _, c := range tokenizeCases {
		if msg := tokCompareHybrid([]byte(c.in)); msg != "" {
			t.Fatal(msg)
		}
	}
}

// TestTokenizeASCIIDifferential: on ASCII text the fast path (own
// segmenter, no normalisation) gives the general path's tokens, and its
// segmenter gives uniseg's segments.
func TestTokenizeASCIIDifferential(t *testing.T) {
	var inputs []string
	for _, c := range tokenizeCases {
		if isASCII([]byte(c.in)) {
			inputs = append(inputs, c.in)
		}
	}
	rng := rand.New(rand.NewPCG(tokSeed(t), 4))
	for range tokRounds(8000) {
		inputs = append(inputs, tokRandomASCII(rng))
	}
	for c := range 128 {
		inputs = append(inputs, string(rune(c)), "a"+string(rune(c))+"b", "1"+string(rune(c))+"2")
	}
	for _, in := range inputs {
		if msg := tokCompareASCII([]byte(in)); msg != "" {
			t.Fatal(msg)
		}
	}
}

// TestTokenizeAllocs: no allocation per call after warm-up, on ASCII,
// mixed and non-ASCII lines and on texts of several chunks (past the limit
// and not). Measured: 0 allocations per call for every set, before and
// after tokenizing in chunks. testing.AllocsPerRun counts allocations,
// which do not vary from run to run, so the bound is the measured value
// itself: any allocation per call is a regression, there is no noise to
// leave room for.
func TestTokenizeAllocs(t *testing.T) {
	long := strings.Repeat(strings.Join(tokBenchUnicode, " "), 30)
	for _, c := range []struct {
		name  string
		set   Settings
		lines []string
	}{
		{"ascii", Settings{}, tokBenchASCII},
		{"mixed", Settings{}, tokBenchMixed},
		{"unicode", Settings{}, tokBenchUnicode},
		{"long unicode, limit reached", Settings{}, []string{long}},
		{"long unicode, no limit", Settings{MaxTokens: MaxTokensLimit}, []string{long}},
		{"U+FDFA", Settings{MaxTokens: 60}, []string{strings.Repeat("\uFDFA", 20000)}},
	} {
		tk := New(c.set)
		var ts Tokens
		texts := make([][]byte, len(c.lines))
		for i, l := range c.lines {
			texts[i] = []byte(l)
			tk.Tokenize(&ts, texts[i])
		}
		// Line by line: AllocsPerRun truncates the mean to an integer, so
		// over all lines at once one line's allocation could vanish.
		for _, text := range texts {
			if allocs := testing.AllocsPerRun(50, func() { tk.Tokenize(&ts, text) }); allocs != 0 {
				t.Errorf("%s: %+.40q: %.0f allocations per call, want 0", c.name, text, allocs)
			}
		}
	}
}

// TestTokenizeConcurrent: one Tokenizer shared by goroutines, each with
// its own Tokens, gives the sequential results (run with -race).
func TestTokenizeConcurrent(t *testing.T) {
	tk := New(Settings{})
	lines := append(append([]string(nil), tokBenchASCII...), tokBenchUnicode...)
	want := make([][]string, len(lines))
	for i, l := range lines {
		want[i] = tokenizeStrings(tk, l)
	}
	var wg sync.WaitGroup
	errs := make(chan string, 4)
	for g := range 4 {
		wg.Go(func() {
			var ts Tokens
			for rep := range 50 {
				i := (rep*7 + g) % len(lines)
				tk.Tokenize(&ts, []byte(lines[i]))
				if got := tokStrings(&ts); !reflect.DeepEqual(got, want[i]) {
					errs <- fmt.Sprintf("line %d: %q, want %q", i, got, want[i])
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for e := range errs {
		t.Error(e)
	}
}

func ExampleTokenizer_Tokenize() {
	tk := New(Settings{})
	var ts Tokens
	tk.Tokenize(&ts, []byte("Is the 10:30 ferry to Osk late? Ask @harbour_desk or see https://ferry.example/live 🙏"))
	for i := 0; i < ts.Len(); i++ {
		fmt.Printf("%s ", ts.At(i))
	}
	fmt.Println()
	// Output: is the <num> <num> ferry to osk late ask <handle> or see <url> 🙏
}

// tokAdversarial are fragments for the incremental differential test:
// long words and numbers, runs of combining marks (more than the 30
// non-starters after which NFKC inserts U+034F, UAX #15 stream-safe
// format), U+FDFA (18 characters under NFKC, with spaces), characters
// that NFKC turns into stop characters or spaces (U+3000, U+2000, U+FF1C),
// WSegSpace characters other than " " (U+1680), CRLF, emoji ZWJ, skin
// tone and flag sequences, Hangul jamo that compose across a chunk cut
// (U+3135 is a boundary before NFKC but becomes the trailing jamo U+11AC,
// which the second NFKC composes with a preceding U+AC00),
// folding that needs a second NFKC, placeholders split by a stop
// character, and every stop character.
var tokAdversarial = []string{
	strings.Repeat("sail", 40), strings.Repeat("9", 70), strings.Repeat("\u0301", 35), strings.Repeat("\u0301\u0316", 20),
	"a" + strings.Repeat("\u0308", 31) + "b", "\uFDFA", "\uFDFA\uFDFA", "\u3000", "\u2000", "\uFF1C", "\uFF5C", "\u1680", "\u1680 ",
	"\r\n", "\r", "\n", "\n\r", "\t", "\v", "\f", " ", "  ", "<", ">", "\\", "^", "`", "{", "|", "}", "、", "。", "「", "」",
	"👨\u200d👩\u200d👧", "\u200d", "👍🏽", " 🏽", "🇬🇷🇮🇹", "🇦", "1\uFE0F\u20E3", "\U0001F3F4\U000E0067\U000E0062\U000E007F",
	"\u1100", "\u1161", "\u11A8", "\uAC00", "\uAC00\u3135", "\u3135", "\u314F", "\u01F0", "J\u030C", "\u1F98\u0301", "\u0345", "\u0390", "İ", "ẞ", "\u13A0\uAB70",
	"東京", "フェリー", "ー", "ｶ", "Ω", "ﬁ", "ＦＥＲＲＹ", "＠ｏｒｌａ", "ｗｗｗ．", "\xff", "\xe2\x82", "\xc3", "\u00AD", "\uFE0F", "\u2019",
	"https://ferry.example/東京", "mira@isles.example", "@orla", "www.ferry.example", "東京@isles.example", "x://", "a.", ".b", "1,", ",2",
	"א\"ב", "a'b", "3.14",
}

// tokRandomMixed is a random text of tokFragments, tokNonASCII and
// tokAdversarial pieces.
func tokRandomMixed(rng *rand.Rand) string {
	var sb strings.Builder
	for n := rng.IntN(24); n >= 0; n-- {
		switch rng.IntN(3) {
		case 0:
			sb.WriteString(tokFragments[rng.IntN(len(tokFragments))])
		case 1:
			sb.WriteString(tokNonASCII[rng.IntN(len(tokNonASCII))])
		default:
			sb.WriteString(tokAdversarial[rng.IntN(len(tokAdversarial))])
		}
	}
	return sb.String()
}

// TestTokenizeIncrementalDifferential: Tokenize, which normalises and cuts
// a text chunk by chunk and stops at the limit, gives exactly the tokens
// of the whole-text path (tokRefTokenize) for every max_tokens from 1 to
// 60 and the largest allowed (no limit in effect), with chunks from 1 byte
// (a cut at every place the tokenizer may cut) to the default size.
func TestTokenizeIncrementalDifferential(t *testing.T) {
	rng := rand.New(rand.NewPCG(tokSeed(t), 8))
	var inputs []string
	for _, c := range tokenizeCases {
		inputs = append(inputs, c.in)
	}
	inputs = append(inputs, tokBenchASCII...)
	inputs = append(inputs, tokBenchUnicode...)
	inputs = append(inputs, tokBenchMixed...)
	for range tokRounds(1500) {
		inputs = append(inputs, tokRandomMixed(rng))
	}
	for range tokRounds(300) {
		inputs = append(inputs, tokRandomASCII(rng)+tokRandomASCII(rng)+tokRandomASCII(rng))
	}
	// Longer than one default chunk, with and without stop characters.
	inputs = append(inputs, strings.Repeat("\uFDFA", 3000), strings.Repeat("東京へ。", 800), strings.Repeat("x", 9000)+" y",
		strings.Repeat("a\u0301", 5000), strings.Repeat("\u0301", 5000)+" a", strings.Repeat("Ferry to Osk, ", 700))
	var limits []int
	for n := 1; n <= 60; n++ {
		limits = append(limits, n)
	}
	limits = append(limits, MaxTokensLimit)
	var ts Tokens
	for i, in := range inputs {
		text := []byte(in)
		base := tokSettings[i%4] // the four without a limit of their own
		chunks := []int{1 + rng.IntN(8), 0}
		if i%16 == 0 {
			chunks = []int{1, 2, 3, 5, 8, 13, 64, 0}
		}
		full := tokRefTokenize(Settings{KeepPunct: base.KeepPunct, NoPlaceholders: base.NoPlaceholders, MaxTokens: MaxTokensLimit}, text)
		for _, limit := range limits {
			set := base
			set.MaxTokens = limit
			want := tokRefTokenize(set, text)
			if limit == MaxTokensLimit && !reflect.DeepEqual(want, full) {
				t.Fatalf("reference not deterministic on %+q", in)
			}
			for _, chunk := range chunks {
				tk := &Tokenizer{s: set, chunk: chunk}
				tk.Tokenize(&ts, text)
				if got := tokStrings(&ts); !reflect.DeepEqual(got, want) && !(len(got) == 0 && len(want) == 0) {
					t.Fatalf("%+v chunk %d, %+q:\n got  %+q\n want %+q", set, chunk, in, got, want)
				}
			}
		}
	}
}

// TestTokenizeBoundedMemory: with max_tokens 60, an 18 MB record costs the
// tokenizer less than 1 MiB of allocations, storage growth included
// (runtime.MemStats.TotalAlloc, bytes, not time): it normalises the text
// only as far as its first 60 tokens need. The whole-text path allocated
// over 1 GB for the U+FDFA text (NFKC makes each character 18) and a copy
// of the text for the others. The first 60 tokens are those of the
// whole-text path on the text's first 64 KiB.
func TestTokenizeBoundedMemory(t *testing.T) {
	const size = 18 << 20
	for _, c := range []struct{ name, unit string }{
		{"U+FDFA", "\uFDFA"},
		{"ascii", "Is the 10:30 ferry to Osk late? see https://ferry.example/live "},
		{"mixed", "Fähre nach Øsk 🙏 ＦＵＬＬ ﬁve 👨\u200d👩\u200d👧 "},
		{"ideographs with stops", "東京へ行くフェリー、"},
	} {
		t.Run(c.name, func(t *testing.T) {
			text := []byte(strings.Repeat(c.unit, size/len(c.unit)))
			set := Settings{MaxTokens: 60}
			tk := New(set)
			var ts Tokens
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			tk.Tokenize(&ts, text)
			runtime.ReadMemStats(&after)
			got := after.TotalAlloc - before.TotalAlloc
			if got >= 1<<20 {
				t.Errorf("%d MiB text: %d bytes allocated, want under 1 MiB", len(text)>>20, got)
			}
			t.Logf("%d MiB text: %d bytes allocated", len(text)>>20, got)
			want := tokRefTokenize(set, text[:runeCut(text, 64<<10)])
			if got := tokStrings(&ts); !reflect.DeepEqual(got, want) {
				t.Errorf("tokens %+q, want %+q", got, want)
			}
		})
	}
}
