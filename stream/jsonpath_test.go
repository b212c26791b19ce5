package stream

import (
	"bytes"
	"encoding/json"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	jsoniter "github.com/json-iterator/go"
)

// jsonCases are records for the differential checks against Go's
// encoding/json (the reference for RFC 8259 validity and string decoding)
// and json-iterator (the reference for finding a value by path).
var jsonCases = []string{
	`{}`, ` { } `, `{"text":"hello"}`, "{\"text\":\"a\"}\r", `{"a":{"b":{"c":"deep"}}}`,
	`{"a":[1,2,{"t":"x"}]}`, `{"n":-0.5e+10,"big":123456789012345678901234567890}`,
	`{"s":"\u00e9\ud83d\ude00\n\t\"\\\/"}`, `{"s":"\ud800"}`, `{"a":true,"b":false,"c":null}`,
	`{"a":1,}`, `{"a" 1}`, `{a:1}`, `{"a":01}`, `{"a":1.}`, `{"a":.5}`, `{"a":-}`, `{"a":1e}`,
	`{"a":"x"`, `{"a":"x"}}`, `{"a":"x"} x`, `[1,2]`, `"x"`, `{"a":tru}`, `{"a":nul}`,
	`{"a":"\x"}`, `{"a":"\u12"}`, "{\"a\":\"\x01\"}", `{"a":[}`, `{"a":[1 2]}`, `{"a":{"b":1]}`,
	`{"text":"t\u0065xt"}`, `{"t\u0065xt":"escaped key"}`, "{\"text\":\"caf\xe9\"}",
	`{  "text"  :  "spaced"  ,  "n" : 1  }`, `{"text":"first","text":"second"}`,
	`{"a":[[[[[[]]]]]]}`, `{"":""}`, `{"a":"}"}`, `{"a":"\\"}`, `{"a":"\\\""}`,
}

func TestValidObjectMatchesEncodingJSON(t *testing.T) {
	var s scanner
	cases := append([]string{}, jsonCases...)
	cases = append(cases, `{"d":`+strings.Repeat("[", 9000)+strings.Repeat("]", 9000)+`}`)
	for _, c := range cases {
		got, _ := s.validObject([]byte(c))
		trimmed := bytes.TrimLeft([]byte(c), " \t\r\n")
		want := json.Valid([]byte(c)) && len(trimmed) > 0 && trimmed[0] == '{'
		if got != want {
			t.Errorf("validObject(%.60q) = %v, encoding/json says %v", c, got, want)
		}
	}
}

// The scanner has no depth limit: a 100,000-level record is valid (RFC
// 8259 lets a parser set a limit; encoding/json's is 10,000).
func TestValidObjectDeep(t *testing.T) {
	var s scanner
	for _, depth := range []int{10_000, 100_000} {
		deep := `{"text":"ferry","d":` + strings.Repeat(`{"a":[`, depth) + strings.Repeat(`]}`, depth) + `}`
		if ok, e := s.validObject([]byte(deep)); !ok {
			t.Fatalf("depth %d: %+v", depth, e)
		}
		bad := `{"d":` + strings.Repeat("[", depth) + strings.Repeat("]", depth-1) + `}`
		if ok, _ := s.validObject([]byte(bad)); ok {
			t.Fatalf("depth %d: unbalanced record accepted", depth)
		}
	}
}

func TestFindPathMatchesJsoniter(t *testing.T) {
	var s scanner
	paths := []string{"text", "a.b.c", "a.2.t", "a.0", "s", "n", "big", "missing", "a.b.missing", ""}
	for _, c := range jsonCases {
		b := []byte(c)
		if ok, _ := s.validObject(b); !ok || !utf8.Valid(b) {
			continue
		}
		for _, p := range paths {
			checkPath(t, b, p)
		}
	}
}

// checkPath compares findPath with json-iterator's Get on a valid record.
func checkPath(t *testing.T, b []byte, p string) {
	t.Helper()
	segs := strings.Split(p, ".")
	keys := make([]any, len(segs))
	for i, s := range segs {
		keys[i] = s
		if n, err := strconv.Atoi(s); err == nil && n >= 0 && s == strconv.Itoa(n) {
			keys[i] = n
		}
	}
	ref := jsoniter.Get(b, keys...)
	if ref.LastError() != nil {
		// A decimal segment names a key when the value is an object.
		str := make([]any, len(segs))
		for i, s := range segs {
			str[i] = s
		}
		if r := jsoniter.Get(b, str...); r.LastError() == nil {
			ref = r
		}
	}
	start, end, ok, _ := findPath(b, skipSpace(b, 0), segs, nil)
	if ok != (ref.LastError() == nil) {
		// json-iterator compares raw key bytes, so an escaped key is the
		// one place it misses what findPath (decoding keys) finds.
		if bytes.Contains(b, []byte(`\u`)) {
			return
		}
		t.Errorf("%s in %.60q: found %v, json-iterator says %v", p, b, ok, ref.LastError())
		return
	}
	if !ok {
		return
	}
	if ref.ValueType() == jsoniter.StringValue {
		var got string
		if err := json.Unmarshal(b[start:end], &got); err != nil {
			t.Errorf("%s in %q: span %q is not a string: %v", p, b, b[start:end], err)
		}
		if want := ref.ToString(); got != want {
			t.Errorf("%s in %q: %q, json-iterator says %q", p, b, got, want)
		}
		dec := appendUnescaped(nil, b[start+1:end-1])
		if string(dec) != got {
			t.Errorf("%s in %q: decoded %q, encoding/json says %q", p, b, dec, got)
		}
	} else if want := strings.TrimSpace(ref.ToString()); ref.ValueType() == jsoniter.NumberValue && string(b[start:end]) != want {
		t.Errorf("%s in %q: %q, json-iterator says %q", p, b, b[start:end], want)
	}
}

func TestAppendStringMatchesEncodingJSON(t *testing.T) {
	for _, s := range []string{"", "plain", "tab\there", "quote\"back\\", "\x00\x1f", "caf\xe9", "é😀", "\u2028"} {
		got := appendString(nil, []byte(s))
		var back string
		if err := json.Unmarshal(got, &back); err != nil {
			t.Fatalf("%q -> %s: not JSON: %v", s, got, err)
		}
		if want := strings.ToValidUTF8(s, "\ufffd"); back != want {
			t.Errorf("%q -> %s -> %q, want %q", s, got, back, want)
		}
	}
}

func FuzzValidObject(f *testing.F) {
	for _, c := range jsonCases {
		f.Add([]byte(c))
	}
	var s scanner
	f.Fuzz(func(t *testing.T, b []byte) {
		got, e := s.validObject(b)
		trimmed := bytes.TrimLeft(b, " \t\r\n")
		want := json.Valid(b) && len(trimmed) > 0 && trimmed[0] == '{'
		if got != want && !(bytes.Count(b, []byte("["))+bytes.Count(b, []byte("{")) > 10000) {
			t.Fatalf("validObject(%q) = %v (%+v), encoding/json says %v", b, got, e, want)
		}
	})
}

func FuzzFindPath(f *testing.F) {
	for _, c := range jsonCases {
		f.Add([]byte(c), "text")
		f.Add([]byte(c), "a.2.t")
	}
	var s scanner
	f.Fuzz(func(t *testing.T, b []byte, p string) {
		if ok, _ := s.validObject(b); !ok || !utf8.Valid(b) || bytes.Contains(b, []byte(`\u`)) || bytes.Count(b, []byte("[")) > 1000 {
			return
		}
		// json-iterator takes the first of repeated keys too; it reads
		// "01" as index 1, so keep indexes canonical.
		for _, seg := range strings.Split(p, ".") {
			if len(seg) > 1 && seg[0] == '0' && seg[1] >= '0' && seg[1] <= '9' {
				return
			}
		}
		checkPath(t, b, p)
	})
}
