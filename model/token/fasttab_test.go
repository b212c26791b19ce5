package token

import (
	"bufio"
	"bytes"
	"flag"
	"fmt"
	"go/format"
	"os"
	"slices"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"golang.org/x/text/unicode/norm"
)

var tokUpdate = flag.Bool("update", false, "rewrite generated files (fasttab.go)")

// Outside references for the fast path's table, from Debian's unicode-data
// (Unicode 15.0.0).
const (
	tokWordBreakProperty = "/usr/share/unicode/auxiliary/WordBreakProperty.txt"
	tokEmojiData         = "/usr/share/unicode/emoji/emoji-data.txt"
)

// tokReadProperty reads a UCD property file (code point or range, then
// fields separated by ";") into a map of the code points whose fields
// keep accepts, to the value it returns.
func tokReadProperty(t *testing.T, path string, keep func(fields []string) (string, bool)) map[rune]string {
	f := tokReferenceAny(t, path)
	out := map[rune]string{}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line, _, _ := strings.Cut(sc.Text(), "#")
		parts := strings.Split(line, ";")
		if len(parts) < 2 {
			continue
		}
		for i := range parts {
			parts[i] = strings.TrimSpace(parts[i])
		}
		v, ok := keep(parts[1:])
		if !ok {
			continue
		}
		lo, hi, _ := strings.Cut(parts[0], "..")
		if hi == "" {
			hi = lo
		}
		a, err1 := strconv.ParseUint(lo, 16, 32)
		b, err2 := strconv.ParseUint(hi, 16, 32)
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: bad line %q", path, sc.Text())
		}
		for r := a; r <= b; r++ {
			out[rune(r)] = v
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if len(out) == 0 {
		t.Fatalf("%s: nothing read", path)
	}
	return out
}

// tokReferenceAny is tokReference for files whose first line names the
// Unicode version as "-15.0.0.txt" or not at all (emoji-data.txt names
// its version further down: checked here).
func tokReferenceAny(t *testing.T, path string) *os.File {
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
	head := make([]byte, 4096)
	n, _ := f.Read(head)
	// emoji-data.txt says "Emoji Version 15.0", the others "15.0.0".
	if !bytes.Contains(head[:n], []byte(strings.TrimSuffix(tokUnicodeVersion, ".0"))) {
		miss("%s is not Unicode %s", path, tokUnicodeVersion)
		return nil
	}
	if _, err := f.Seek(0, 0); err != nil {
		t.Fatal(err)
	}
	return f
}

// tokFastTable computes the fast path's table (see fast.go) from the
// reference files, x/text and the general path itself.
func tokFastTable(t *testing.T) (blockOf [256]uint8, blocks [][256]uint32, pool []byte) {
	wb := tokReadProperty(t, tokWordBreakProperty, func(f []string) (string, bool) { return f[0], true })
	pict := tokReadProperty(t, tokEmojiData, func(f []string) (string, bool) { return f[0], f[0] == "Extended_Pictographic" })
	// Characters NFKC changes (N) or may compose with what precedes (M).
	qc := tokReadProperty(t, tokDerivedNormProps, func(f []string) (string, bool) {
		if len(f) < 2 || f[0] != "NFKC_QC" && f[0] != "NFC_QC" {
			return "", false
		}
		return f[1], f[1] == "N" || f[1] == "M"
	})
	maybe := map[rune]bool{}
	for r, v := range qc {
		if v == "M" {
			maybe[r] = true
		}
	}
	classOf := map[string]uint8{
		"": wbOther, "ALetter": wbALetter, "Numeric": wbNumeric, "Katakana": wbKatakana, "Extend": wbExtend,
		"MidLetter": wbMidLetter, "MidNum": wbMidNum, "MidNumLet": wbMidNumLet, "ExtendNumLet": wbExtendNumLet,
	}
	ccc := func(r rune) uint8 { return norm.NFKC.PropertiesString(string(r)).CCC() }
	// class of r, a character of normalised text; ok false for what the
	// fast path does not take.
	class := func(r rune) (uint8, bool) {
		if r < utf8.RuneSelf {
			c := asciiWB[r]
			return c, c != wbCR && c != wbLF && c != wbNewline
		}
		if _, ok := pict[r]; ok {
			return 0, false
		}
		c, ok := classOf[wb[r]]
		return c, ok
	}
	m := func(r rune) []rune { return []rune(string(tokRefNormalize([]byte(string(r))))) }
	// self: r is a fast character of normalised text (maps to itself).
	self := func(r rune) bool {
		if r < utf8.RuneSelf {
			_, ok := class(r)
			return ok
		}
		if _, ok := qc[r]; ok || r >= 0x10000 {
			return false
		}
		mr := m(r)
		if len(mr) != 1 || mr[0] != r || runeKind(r)&ckKeycap != 0 {
			return false
		}
		c, ok := class(r)
		return ok && (ccc(r) == 0 || c == wbExtend)
	}
	var entries [0x10000]uint32
	pool = []byte{0}
	poolAt := map[string]int{}
	for r := rune(0x80); r < 0x10000; r++ {
		if r >= 0xD800 && r <= 0xDFFF {
			continue
		}
		mr := m(r)
		if len(mr) == 0 {
			continue
		}
		var e uint32
		if len(mr) == 1 && mr[0] == r {
			if !self(r) {
				continue
			}
			c, _ := class(r)
			e = uint32(c) | uint32(ccc(r))<<feCCCShift
		} else {
			// r itself must not compose with what precedes it, nor
			// its full decomposition, and it is a starter.
			if maybe[r] || ccc(r) != 0 {
				continue
			}
			d := []rune(norm.NFKD.String(string(r)))
			if maybe[d[0]] || ccc(d[0]) != 0 {
				continue
			}
			c0, _ := class(mr[0])
			ok := true
			for _, x := range mr {
				c, okc := class(x)
				ok = ok && self(x) && ccc(x) == 0 && okc && c == c0
			}
			if !ok || len(mr) > 1 && c0 != wbALetter && c0 != wbNumeric {
				continue
			}
			key := string(mr)
			off, seen := poolAt[key]
			if !seen {
				off = len(pool)
				poolAt[key] = off
				pool = append(pool, byte(len(key)))
				pool = append(pool, key...)
			}
			e = uint32(c0) | uint32(off)<<fePoolShift
		}
		e |= uint32(runeKind(r))<<feKindShift | feFast
		last := mr[len(mr)-1]
		if lc, _ := class(last); lc != wbWSegSpace && !wordExtend(last) && ccc(r) == 0 {
			e |= feCutAfter
		}
		entries[r] = e
	}
	if len(pool) >= 1<<(32-fePoolShift) {
		t.Fatalf("pool of %d bytes does not fit the entry", len(pool))
	}
	// Two levels: blocks of 256 entries, equal blocks shared; block 0 is
	// all slow (and holds ASCII, which the fast path never looks up).
	blocks = [][256]uint32{{}}
	for hi := range 256 {
		var b [256]uint32
		copy(b[:], entries[hi<<8:])
		if j := slices.Index(blocks, b); j >= 0 {
			blockOf[hi] = uint8(j)
			continue
		}
		blockOf[hi] = uint8(len(blocks))
		blocks = append(blocks, b)
	}
	return blockOf, blocks, pool
}

// TestFastTable: fasttab.go is the table tokFastTable computes now (from
// Debian's unicode-data files for Unicode 15.0.0, x/text and the general
// path); -update rewrites it.
func TestFastTable(t *testing.T) {
	blockOf, blocks, pool := tokFastTable(t)
	var sb strings.Builder
	sb.WriteString("// Code generated by TestFastTable (go test ./model/token -run TestFastTable -update); DO NOT EDIT.\n\n")
	sb.WriteString("package token\n\n")
	fmt.Fprintf(&sb, "// fastPool holds the normalised forms of the fast characters that\n// normalise to something else: a length byte, then the bytes.\n")
	fmt.Fprintf(&sb, "const fastPool = %q\n\n", pool)
	sb.WriteString("// fastBlockOf is the block of fastBlocks for each high byte of a BMP code point.\n")
	sb.WriteString("var fastBlockOf = [256]uint8{")
	for i, b := range blockOf {
		if i%16 == 0 {
			sb.WriteString("\n")
		}
		fmt.Fprintf(&sb, "%d, ", b)
	}
	sb.WriteString("\n}\n\n")
	fmt.Fprintf(&sb, "// fastBlocks are the entries of fast.go, 256 code points a block.\nvar fastBlocks = [%d][256]uint32{\n", len(blocks))
	for _, b := range blocks {
		sb.WriteString("{")
		for i, e := range b {
			if i%8 == 0 {
				sb.WriteString("\n")
			}
			fmt.Fprintf(&sb, "%#x, ", e)
		}
		sb.WriteString("\n},\n")
	}
	sb.WriteString("}\n")
	src, err := format.Source([]byte(sb.String()))
	if err != nil {
		t.Fatal(err)
	}
	const path = "fasttab.go"
	if *tokUpdate {
		if err := os.WriteFile(path, src, 0o666); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, src) {
		t.Fatalf("%s is not the table computed from the references: run go test ./model/token -run TestFastTable -update", path)
	}
	n := 0
	for _, b := range blocks {
		for _, e := range b {
			if e&feFast != 0 {
				n++
			}
		}
	}
	t.Logf("%d blocks, %d fast entries in distinct blocks, pool %d bytes", len(blocks), n, len(pool))
}
