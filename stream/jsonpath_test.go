package stream

import (
	"bytes"
	"encoding/json"
	"reflect"
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
	`{"\u00e9":"escaped first","é":"raw second"}`, `{"é":"raw first","\u00e9":"escaped second"}`,
	`{"\ud83d\ude00":{"deep":[1,{"x":null},[true]]}}`, `{"k\"q":1,"k\\":{"x":[true,false]}}`,
	`{"te\u0078t":{"a":1},"text":"second"}`, `{"\u0074ext":[ 1 , "two" , {"t":false} ]}`,
	`{"a\/b":true,"c":{"\ud800":"lone"}}`, `{"s":"\ud800\u0041"}`, `{"x":{"b":{"c":"in \"quotes\" {"}}}`,
}

// paths are looked up in every valid jsonCases record: keys with escapes
// in the record, and values of every kind.
var paths = []string{"text", "a.b.c", "a.2.t", "a.0", "s", "n", "big", "missing", "a.b.missing", "",
	"a", "b", "c", "a.2", "é", "😀", "😀.deep", "😀.deep.1", "😀.deep.2.0", "😀.deep.1.x", `k"q`, `k\`, `k\.x`,
	`k\.x.1`, "text.2", "text.2.t", "a/b", "c.\ufffd", "x.b", "x.b.c", "d"}

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
		if got {
			checkMembers(t, []byte(c), s.members)
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

func TestFindPathMatchesReferences(t *testing.T) {
	var s scanner
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

// refPath finds path in the valid JSON b with encoding/json's Decoder
// (the reference for RFC 8259 and for decoding keys, \u escapes included):
// a segment names an object key, the first of repeated keys winning (RFC
// 8259 leaves repeats to the reader; findPath documents first), or, where
// the value is an array, an index in decimal digits. It returns the
// value's bytes as the decoder's json.RawMessage.
func refPath(b []byte, path []string) (json.RawMessage, bool) {
	raw := json.RawMessage(b)
	for _, seg := range path {
		dec := json.NewDecoder(bytes.NewReader(raw))
		tok, err := dec.Token()
		if err != nil {
			return nil, false
		}
		found := false
		switch tok {
		case json.Delim('{'):
			for dec.More() {
				k, err := dec.Token()
				var v json.RawMessage
				if err != nil || dec.Decode(&v) != nil {
					return nil, false
				}
				if k.(string) == seg && !found {
					raw, found = v, true
				}
			}
		case json.Delim('['):
			n, err := strconv.Atoi(seg)
			if err != nil || len(seg) > 9 || strings.TrimLeft(seg, "0123456789") != "" {
				return nil, false
			}
			for i := 0; dec.More(); i++ {
				var v json.RawMessage
				if dec.Decode(&v) != nil {
					return nil, false
				}
				if i == n {
					raw, found = v, true
				}
			}
		}
		if !found {
			return nil, false
		}
	}
	return raw, true
}

// decodeAny decodes one JSON value, numbers kept as written.
func decodeAny(b []byte) (any, error) {
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	var v any
	err := d.Decode(&v)
	return v, err
}

// checkPath compares findPath on a valid record with the reference
// decoders: encoding/json for every record and kind of value (found or
// not, the span's bytes, the decoded value, the decoded string), and
// json-iterator's Get where the record has no escapes (it matches keys by
// their raw bytes).
func checkPath(t *testing.T, b []byte, p string) {
	t.Helper()
	segs := strings.Split(p, ".")
	start, end, ok, _ := findPath(b, skipSpace(b, 0), segs, nil)
	// The finder looks the first segment up among the members validObject
	// listed: it must find the same span as the walk from the start.
	var sc scanner
	if valid, _ := sc.validObject(b); valid {
		checkMembers(t, b, sc.members)
		ms, me, mok, _ := findMember(b, sc.members, segs, nil)
		if mok != ok || mok && (ms != start || me != end) {
			t.Errorf("%s in %.80q: findMember gives [%d,%d) %v, findPath [%d,%d) %v", p, b, ms, me, mok, start, end, ok)
		}
	}
	want, wantOK := refPath(b, segs)
	if ok != wantOK {
		t.Errorf("%s in %.80q: found %v, encoding/json says %v", p, b, ok, wantOK)
		return
	}
	if !bytes.Contains(b, []byte(`\`)) && canonicalIndexes(segs) {
		if refOK := jsoniterGet(b, segs).LastError() == nil; refOK != ok {
			t.Errorf("%s in %.80q: found %v, json-iterator says %v", p, b, ok, refOK)
		}
	}
	if !ok {
		return
	}
	span := b[start:end]
	if !bytes.Equal(span, want) {
		t.Errorf("%s in %.80q: span %q, encoding/json's raw value %q", p, b, span, want)
	}
	got, err1 := decodeAny(span)
	ref, err2 := decodeAny(want)
	if err1 != nil || err2 != nil || !reflect.DeepEqual(got, ref) {
		t.Errorf("%s in %.80q: span decodes to %#v (%v), encoding/json's value to %#v (%v)", p, b, got, err1, ref, err2)
	}
	if str, isStr := ref.(string); isStr {
		if dec := appendUnescaped(nil, span[1:len(span)-1]); string(dec) != str {
			t.Errorf("%s in %q: decoded %q, encoding/json says %q", p, b, dec, str)
		}
	}
}

// canonicalIndexes reports whether no segment is a decimal with a leading
// zero ("01"), which json-iterator does not read as findPath does.
func canonicalIndexes(segs []string) bool {
	for _, seg := range segs {
		if len(seg) > 1 && seg[0] == '0' && seg[1] >= '0' && seg[1] <= '9' {
			return false
		}
	}
	return true
}

// jsoniterGet is json-iterator's Get with a decimal segment taken as an
// index, or as a key when the value there is an object.
func jsoniterGet(b []byte, segs []string) jsoniter.Any {
	keys := make([]any, len(segs))
	for i, s := range segs {
		keys[i] = s
		if n, err := strconv.Atoi(s); err == nil && n >= 0 && s == strconv.Itoa(n) {
			keys[i] = n
		}
	}
	ref := jsoniter.Get(b, keys...)
	if ref.LastError() != nil {
		str := make([]any, len(segs))
		for i, s := range segs {
			str[i] = s
		}
		if r := jsoniter.Get(b, str...); r.LastError() == nil {
			ref = r
		}
	}
	return ref
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

// checkMembers checks the members validObject listed for the valid object
// b against a walk of b by nextMember, member by member.
func checkMembers(t *testing.T, b []byte, members []member) {
	t.Helper()
	var walked []member
	for i := skipSpace(b, 0) + 1; ; {
		m, next, more := nextMember(b, i)
		if !more {
			break
		}
		walked = append(walked, m)
		i = next
	}
	if !reflect.DeepEqual(members, walked) && !(len(members) == 0 && len(walked) == 0) {
		t.Errorf("%.80q: validObject lists members %v, a walk finds %v", b, members, walked)
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
		if got {
			checkMembers(t, b, s.members)
		}
	})
}

func FuzzFindPath(f *testing.F) {
	for _, c := range jsonCases {
		for _, p := range []string{"text", "a.2.t", "é", "😀.deep.1", `k\.x`, "a"} {
			f.Add([]byte(c), p)
		}
	}
	var s scanner
	f.Fuzz(func(t *testing.T, b []byte, p string) {
		// encoding/json stops at 10,000 levels of nesting; invalid
		// UTF-8 it reads as U+FFFD where findPath keeps the bytes.
		if ok, _ := s.validObject(b); !ok || !utf8.Valid(b) || bytes.Count(b, []byte("["))+bytes.Count(b, []byte("{")) > 1000 {
			return
		}
		checkPath(t, b, p)
	})
}
