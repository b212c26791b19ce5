package token

import (
	"encoding/binary"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
	"unicode/utf8"
)

// tokCompareFast reports how Tokenize (the fast path for text that is not
// all ASCII) differs from the general path with uniseg alone on text s,
// under the given settings, or "" when every token is byte-identical.
func tokCompareFast(s []byte, sets []Settings) string {
	var a, b Tokens
	for _, set := range sets {
		tk := New(set)
		tk.Tokenize(&a, s)
		tk.tokenizeGeneral(&b, s, cutUniseg)
		if !slices.EqualFunc(tokStrings(&a), tokStrings(&b), func(x, y string) bool { return x == y }) {
			return fmt.Sprintf("%+v %+q:\n fast    %+q\n general %+q", set, s, tokStrings(&a), tokStrings(&b))
		}
	}
	return ""
}

// tokFastChars are the BMP code points whose table entry says fast.
func tokFastChars() []rune {
	var out []rune
	for r := rune(0x80); r < 0x10000; r++ {
		if fastLookup(r)&feFast != 0 {
			out = append(out, r)
		}
	}
	return out
}

// tokContexts are neighbours for the per-character test: every ASCII
// Word_Break class and stop character, fast characters of every class
// (letters of several scripts, marks with and without a combining class,
// digits, MidLetter, MidNum, MidNumLet, ExtendNumLet, katakana, ideographs,
// characters NFKC maps to ASCII or spaces) and characters the fast path
// leaves to the general path (composing marks, Hebrew, emoji, ignorables,
// U+3000, invalid UTF-8).
var tokContexts = []string{
	"a", "Z", "7", " ", "  ", ".", ",", ";", ":", "'", "\"", "_", "-", "@", "/", "\n", "\r", "\r\n", "\t", "<", "|",
	"é", "ß", "Ж", "ж", "Σ", "ς", "ά", "ب", "\u064E", "\u0651", "\u0670", "٣", "\u066B", "\u066C", "\u060C", "क", "\u093E", "\u094D", "\u0903", "५",
	"カ", "ー", "ｶ", "ひ", "東", "한", "、", "。", "「", "·", "\u00A0", "\u2019", "\u2018", "\u2024", "‿", "ﬁ", "①", "Ａ", "５", "．",
	"\u0301", "\u093C", "א", "😀", "\u00AD", "\u200D", "\u3000", "\u1161", "\uFDFA", "\xff", "©", "www.", "https://", "x@y.example",
}

// TestTokenizeFastChars: for every character the fast path takes, alone,
// doubled and between random neighbours (tokContexts, and other fast
// characters), the fast path gives the general path's tokens. This covers
// each table entry in every context class its Word_Break rules look at.
func TestTokenizeFastChars(t *testing.T) {
	chars := tokFastChars()
	if len(chars) < 40000 {
		t.Fatalf("only %d fast characters", len(chars))
	}
	rng := rand.New(rand.NewPCG(tokSeed(t), 10))
	sets := []Settings{{}, {KeepPunct: true, NoPlaceholders: true}}
	pick := func() string {
		if rng.IntN(3) == 0 {
			return string(chars[rng.IntN(len(chars))])
		}
		return tokContexts[rng.IntN(len(tokContexts))]
	}
	rounds := 6
	if testing.Short() {
		rounds = 1
	}
	bad := 0
	for _, r := range chars {
		c := string(r)
		ins := []string{c, c + c, "a" + c, c + "a", c + " " + c}
		for range rounds {
			ins = append(ins, pick()+c+pick(), pick()+pick()+c+pick()+pick())
		}
		for _, in := range ins {
			if msg := tokCompareFast([]byte(in), sets); msg != "" {
				if bad++; bad <= 10 {
					t.Errorf("U+%04X: %s", r, msg)
				}
			}
		}
	}
	if bad > 0 {
		t.Fatalf("%d mismatches", bad)
	}
	t.Logf("%d fast characters, %d contexts each", len(chars), 5+2*rounds)
}

// TestTokenizeFastRandom: random texts of fast characters, ASCII and
// characters the fast path leaves to the general path, long enough to be
// cut into pieces and chunks (chunk sizes down to 1 byte), give the
// general path's tokens.
func TestTokenizeFastRandom(t *testing.T) {
	chars := tokFastChars()
	rng := rand.New(rand.NewPCG(tokSeed(t), 12))
	var sb strings.Builder
	for range tokRounds(4000) {
		sb.Reset()
		for n := rng.IntN(40); n >= 0; n-- {
			switch rng.IntN(4) {
			case 0:
				sb.WriteString(tokContexts[rng.IntN(len(tokContexts))])
			case 1:
				sb.WriteString(tokAdversarial[rng.IntN(len(tokAdversarial))])
			default:
				for k := rng.IntN(6); k >= 0; k-- {
					sb.WriteRune(chars[rng.IntN(len(chars))])
				}
				sb.WriteByte(' ')
			}
		}
		s := []byte(sb.String())
		if msg := tokCompareFast(s, tokSettings); msg != "" {
			t.Fatal(msg)
		}
		want := tokRefTokenize(Settings{}, s)
		var ts Tokens
		for _, chunk := range []int{1, 3, 16} {
			(&Tokenizer{chunk: chunk}).Tokenize(&ts, s)
			if got := tokStrings(&ts); !reflect.DeepEqual(got, want) && !(len(got) == 0 && len(want) == 0) {
				t.Fatalf("chunk %d %+q:\n got  %+q\n want %+q", chunk, s, got, want)
			}
		}
	}
}

// tokReadMO returns the translated strings of a GNU gettext .mo file
// (the format of the GNU gettext manual, "The Format of GNU MO Files":
// magic 0x950412de, string count, offsets of the original and the
// translation tables of (length, offset) pairs). Plural forms are
// NUL-separated; each is a string of its own.
func tokReadMO(b []byte) ([]string, error) {
	if len(b) < 28 {
		return nil, fmt.Errorf("short file")
	}
	var bo binary.ByteOrder = binary.LittleEndian
	if bo.Uint32(b) != 0x950412de {
		bo = binary.BigEndian
		if bo.Uint32(b) != 0x950412de {
			return nil, fmt.Errorf("not a .mo file")
		}
	}
	n, tr := int(bo.Uint32(b[8:])), int(bo.Uint32(b[16:]))
	var out []string
	for i := range n {
		at := tr + 8*i
		if at+8 > len(b) {
			return nil, fmt.Errorf("table out of range")
		}
		l, off := int(bo.Uint32(b[at:])), int(bo.Uint32(b[at+4:]))
		if off+l > len(b) {
			return nil, fmt.Errorf("string out of range")
		}
		for _, s := range strings.Split(string(b[off:off+l]), "\x00") {
			if s != "" && !strings.HasPrefix(s, "Project-Id-Version:") {
				out = append(out, s)
			}
		}
	}
	return out, nil
}

// tokCorpusLangs are the languages of the translation corpora: six
// scripts (Cyrillic, Greek, Arabic, Devanagari, Japanese kana and kanji,
// Chinese hanzi) and two Latin-script languages.
var tokCorpusLangs = []struct{ lang, script string }{
	{"ru", "Cyrillic"}, {"el", "Greek"}, {"ar", "Arabic"}, {"hi", "Devanagari"}, {"ja", "Japanese"}, {"zh_CN", "Chinese"},
	{"de", "Latin (German)"}, {"fr", "Latin (French)"},
}

// tokCorpus returns the translated strings of language lang from the
// gettext catalogues Debian installs under /usr/share/locale: those of
// the iso-codes package (names of languages, countries, subdivisions,
// currencies and scripts, translated by the iso-codes project; required,
// so missing ones skip, or fail under CI=true) and any other catalogue
// installed there (messages of installed programs, more text where
// present).
func tokCorpus(t *testing.T, lang string) []string {
	dir := filepath.Join("/usr/share/locale", lang, "LC_MESSAGES")
	iso, _ := filepath.Glob(filepath.Join(dir, "iso_*.mo"))
	if len(iso) == 0 {
		msg := fmt.Sprintf("no iso-codes catalogues in %s (apt-get install iso-codes)", dir)
		if os.Getenv("CI") == "true" {
			t.Fatal(msg)
		}
		t.Skip(msg)
	}
	all, _ := filepath.Glob(filepath.Join(dir, "*.mo"))
	var out []string
	for _, p := range all {
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		ss, err := tokReadMO(b)
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		out = append(out, ss...)
	}
	return out
}

// TestTokenizeFastCorpora: on the translated text of eight languages in
// six scripts (tokCorpus: Debian's iso-codes catalogues and the other
// installed ones), every string, and records of several strings joined
// (with a space, and without), gives byte-identical tokens on the fast
// path and the general path under every tokSettings. It logs how much of
// each corpus the fast path takes itself.
func TestTokenizeFastCorpora(t *testing.T) {
	for _, c := range tokCorpusLangs {
		t.Run(c.lang, func(t *testing.T) {
			strs := tokCorpus(t, c.lang)
			if len(strs) < 500 {
				t.Fatalf("only %d strings", len(strs))
			}
			if testing.Short() {
				strs = strs[:len(strs)/10]
			}
			var recs []string
			recs = append(recs, strs...)
			for i := 0; i+4 <= len(strs); i += 4 {
				recs = append(recs, strings.Join(strs[i:i+4], " "), strings.Join(strs[i:i+2], ""))
			}
			bytesIn, fastBytes := 0, 0
			for _, r := range recs {
				if msg := tokCompareFast([]byte(r), tokSettings); msg != "" {
					t.Fatal(msg)
				}
				bytesIn += len(r)
				fastBytes += tokFastShare([]byte(r))
			}
			t.Logf("%s (%s): %d records, %d bytes, identical; %.1f%% of the bytes on the fast path itself",
				c.lang, c.script, len(recs), bytesIn, 100*float64(fastBytes)/float64(bytesIn))
		})
	}
}

// tokFastShare is how many bytes of text the fast path tokenizes itself
// (the rest goes to the general path), with the default chunk sizes.
func tokFastShare(text []byte) int {
	if isASCII(text) {
		return len(text)
	}
	var ts Tokens
	fast := 0
	chunk, most := tokFirstChunk, tokChunk
	for len(text) > 0 {
		n, slow := ts.foldFast(text, chunk)
		chunk = min(2*chunk, most)
		if n > 0 {
			fast += n
		} else {
			n = slowEnd(text, slow)
		}
		text = text[n:]
	}
	return fast
}

// FuzzTokenizeFast: on any input, and on the input mapped onto fast
// characters (each byte pair picks one, so most of the text takes the
// fast path), Tokenize gives the general path's tokens under every
// tokSettings.
func FuzzTokenizeFast(f *testing.F) {
	for _, s := range tokContexts {
		f.Add([]byte(s))
	}
	f.Add([]byte("Паром в 10:30 отменён, см. https://ferry.example/ru"))
	f.Add([]byte("Το πλοίο αργεί· «ΣΟΦΟΣ» ΐ"))
	f.Add([]byte("العبّارة ٣٫٥ ساعات، آسف"))
	f.Add([]byte("फ़ेरी देर से है। क्षमा करें"))
	f.Add([]byte("フェリーは１０時に出発、東京へ。ｶﾀｶﾅ"))
	chars := tokFastChars()
	f.Fuzz(func(t *testing.T, text []byte) {
		if msg := tokCompareFast(text, tokSettings); msg != "" {
			t.Fatal(msg)
		}
		var sb strings.Builder
		for i := 0; i+1 < len(text); i += 2 {
			if text[i] < 0x20 {
				sb.WriteByte(" .,:'\n_a1-@"[int(text[i+1])%11])
				continue
			}
			sb.WriteRune(chars[int(binary.LittleEndian.Uint16(text[i:]))%len(chars)])
		}
		mapped := []byte(sb.String())
		if !utf8.Valid(mapped) {
			t.Fatal("mapped text not valid UTF-8")
		}
		if msg := tokCompareFast(mapped, tokSettings); msg != "" {
			t.Fatal(msg)
		}
	})
}
