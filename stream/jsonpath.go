package stream

import (
	"bytes"
	"unicode/utf16"
	"unicode/utf8"
)

// This file reads JSON records as raw bytes: it validates a record without
// decoding it, walks an object's members, finds the value at a dotted path,
// and decodes string escapes. Nothing here allocates once the scanner's stack
// has grown; nesting depth is limited only by the record's length.

// strPlain[c] is true for bytes that may appear unescaped in a JSON string
// and need no attention: everything from 0x20 up except '"' and '\\'.
var strPlain = func() (t [256]bool) {
	for c := 0x20; c < 256; c++ {
		t[c] = c != '"' && c != '\\'
	}
	return
}()

func isSpace(c byte) bool { return c == ' ' || c == '\t' || c == '\n' || c == '\r' }

func skipSpace(b []byte, i int) int {
	for i < len(b) && isSpace(b[i]) {
		i++
	}
	return i
}

// syntaxError is where and why a record is not valid JSON.
type syntaxError struct {
	off int
	msg string
}

// scanner validates JSON. Its stack and member list are reused between
// records; one scanner belongs to one goroutine.
type scanner struct {
	stack []byte // '{' or '[' per open container
	// members are the top-level members of the object the last successful
	// validObject checked, in order: the finder and the splicer read them
	// instead of walking the object again.
	members []member
}

// validObject reports whether b (one record, without its line terminator)
// is exactly one valid JSON object, optionally surrounded by whitespace, as
// RFC 8259 defines it. Like encoding/json.Valid it does not check that
// strings are valid UTF-8. On failure it says where and why. On success
// s.members holds the object's top-level members, valid until the next
// call.
func (s *scanner) validObject(b []byte) (bool, syntaxError) {
	s.members = s.members[:0]
	i := skipSpace(b, 0)
	if i >= len(b) || b[i] != '{' {
		return false, syntaxError{i, "record is not a JSON object"}
	}
	st := s.stack[:0]
	defer func() { s.stack = st[:0] }()
	wantValue := true
	for {
		if wantValue {
			i = skipSpace(b, i)
			if i >= len(b) {
				return false, syntaxError{i, "unexpected end of record"}
			}
			if len(st) == 1 {
				s.members[len(s.members)-1].valStart = i
			}
			switch c := b[i]; {
			case c == '{':
				st = append(st, '{')
				i = skipSpace(b, i+1)
				if i < len(b) && b[i] == '}' {
					st = st[:len(st)-1]
					i++
					wantValue = false
					break
				}
				var e syntaxError
				if i, e = s.key(b, i, len(st) == 1); e.msg != "" {
					return false, e
				}
				continue
			case c == '[':
				st = append(st, '[')
				i = skipSpace(b, i+1)
				if i < len(b) && b[i] == ']' {
					st = st[:len(st)-1]
					i++
					wantValue = false
				}
				continue
			case c == '"':
				end, ok := stringEnd(b, i)
				if !ok {
					return false, syntaxError{i, "bad string"}
				}
				i = end
			case c == '-' || c >= '0' && c <= '9':
				end, ok := numberEnd(b, i)
				if !ok {
					return false, syntaxError{i, "bad number"}
				}
				i = end
			case c == 't':
				if !bytes.HasPrefix(b[i:], []byte("true")) {
					return false, syntaxError{i, "bad literal"}
				}
				i += 4
			case c == 'f':
				if !bytes.HasPrefix(b[i:], []byte("false")) {
					return false, syntaxError{i, "bad literal"}
				}
				i += 5
			case c == 'n':
				if !bytes.HasPrefix(b[i:], []byte("null")) {
					return false, syntaxError{i, "bad literal"}
				}
				i += 4
			default:
				return false, syntaxError{i, "unexpected character " + quoteByte(c)}
			}
			wantValue = false
		}
		// After a value.
		if len(st) == 1 {
			s.members[len(s.members)-1].valEnd = i
		}
		i = skipSpace(b, i)
		if len(st) == 0 {
			if i != len(b) {
				return false, syntaxError{i, "unexpected data after the object"}
			}
			return true, syntaxError{}
		}
		if i >= len(b) {
			return false, syntaxError{i, "unexpected end of record"}
		}
		top := st[len(st)-1]
		switch c := b[i]; {
		case c == ',':
			i++
			if top == '{' {
				var e syntaxError
				if i, e = s.key(b, skipSpace(b, i), len(st) == 1); e.msg != "" {
					return false, e
				}
			}
			wantValue = true
		case c == '}' && top == '{', c == ']' && top == '[':
			st = st[:len(st)-1]
			i++
		default:
			return false, syntaxError{i, "unexpected character " + quoteByte(c)}
		}
	}
}

// key checks `"key" :` at b[i:] and returns the offset after the colon;
// a key of the top-level object (top) starts a new entry of s.members.
func (s *scanner) key(b []byte, i int, top bool) (int, syntaxError) {
	if i >= len(b) || b[i] != '"' {
		return i, syntaxError{i, "expected a string key"}
	}
	end, ok := stringEnd(b, i)
	if !ok {
		return i, syntaxError{i, "bad string"}
	}
	if top {
		s.members = append(s.members, member{keyStart: i, keyEnd: end})
	}
	i = skipSpace(b, end)
	if i >= len(b) || b[i] != ':' {
		return i, syntaxError{i, "expected ':' after a key"}
	}
	return i + 1, syntaxError{}
}

func quoteByte(c byte) string {
	if c >= 0x20 && c < 0x7f {
		return "'" + string(rune(c)) + "'"
	}
	const hex = "0123456789abcdef"
	return "0x" + string([]byte{hex[c>>4], hex[c&15]})
}

// stringEnd checks the string starting at the quote b[i] and returns the
// offset just after its closing quote.
func stringEnd(b []byte, i int) (int, bool) {
	i++
	for {
		for i < len(b) && strPlain[b[i]] {
			i++
		}
		if i >= len(b) {
			return i, false
		}
		switch b[i] {
		case '"':
			return i + 1, true
		case '\\':
			if i+1 >= len(b) {
				return i, false
			}
			switch b[i+1] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
				i += 2
			case 'u':
				if i+6 > len(b) || !isHex4(b[i+2:i+6]) {
					return i, false
				}
				i += 6
			default:
				return i, false
			}
		default: // control character
			return i, false
		}
	}
}

func isHex4(h []byte) bool {
	for _, c := range h[:4] {
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f' || c >= 'A' && c <= 'F') {
			return false
		}
	}
	return true
}

// numberEnd checks -?(0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)? at b[i:].
func numberEnd(b []byte, i int) (int, bool) {
	digits := func(i int) int {
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
		}
		return i
	}
	if b[i] == '-' {
		i++
	}
	switch {
	case i < len(b) && b[i] == '0':
		i++
	case i < len(b) && b[i] >= '1' && b[i] <= '9':
		i = digits(i)
	default:
		return i, false
	}
	if i < len(b) && b[i] == '.' {
		j := digits(i + 1)
		if j == i+1 {
			return j, false
		}
		i = j
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			i++
		}
		j := digits(i)
		if j == i {
			return j, false
		}
		i = j
	}
	return i, true
}

// skipValue returns the offset just after the value starting at b[i]. b must
// be valid JSON (checked by validObject): it does not check again.
func skipValue(b []byte, i int) int {
	switch b[i] {
	case '"':
		return skipString(b, i)
	case '{', '[':
		depth := 0
		for ; i < len(b); i++ {
			switch b[i] {
			case '{', '[':
				depth++
			case '}', ']':
				depth--
				if depth == 0 {
					return i + 1
				}
			case '"':
				i = skipString(b, i) - 1
			}
		}
		return i
	default:
		for i < len(b) && !isSpace(b[i]) && b[i] != ',' && b[i] != '}' && b[i] != ']' {
			i++
		}
		return i
	}
}

// skipString returns the offset after the valid string starting at b[i].
func skipString(b []byte, i int) int {
	i++
	for i < len(b) {
		j := bytes.IndexByte(b[i:], '"')
		if j < 0 {
			return len(b)
		}
		i += j
		n := 0 // backslashes just before the quote
		for k := i - 1; k >= 0 && b[k] == '\\'; k-- {
			n++
		}
		i++
		if n%2 == 0 {
			return i
		}
	}
	return i
}

// member is one object member: the key's span including quotes and the
// value's span.
type member struct {
	keyStart, keyEnd, valStart, valEnd int
}

// nextMember reads the member of the valid object b that starts at b[i]
// (i just after '{' or ','), or reports the closing brace's offset and false
// when the object ends there.
func nextMember(b []byte, i int) (m member, next int, ok bool) {
	i = skipSpace(b, i)
	if b[i] == '}' {
		return m, i, false
	}
	m.keyStart = i
	m.keyEnd = skipString(b, i)
	i = skipSpace(b, m.keyEnd)
	i = skipSpace(b, i+1) // ':'
	m.valStart = i
	m.valEnd = skipValue(b, i)
	i = skipSpace(b, m.valEnd)
	if b[i] == ',' {
		i++
	}
	return m, i, true
}

// keyIs reports whether the JSON string raw (with quotes) decodes to name.
// scratch is reused for keys with escapes and returned.
func keyIs(raw []byte, name string, scratch []byte) (bool, []byte) {
	inner := raw[1 : len(raw)-1]
	if bytes.IndexByte(inner, '\\') < 0 {
		return string(inner) == name, scratch
	}
	scratch = appendUnescaped(scratch[:0], inner)
	return string(scratch) == name, scratch
}

// findMember is findPath for a top-level object whose members validObject
// listed: the first segment is looked up among members (the first match
// wins, as in findPath), the rest by findPath from that value.
func findMember(b []byte, members []member, path []string, scratch []byte) (start, end int, ok bool, _ []byte) {
	for _, m := range members {
		var is bool
		if is, scratch = keyIs(b[m.keyStart:m.keyEnd], path[0], scratch); is {
			if len(path) == 1 {
				return m.valStart, m.valEnd, true, scratch
			}
			return findPath(b, m.valStart, path[1:], scratch)
		}
	}
	return 0, 0, false, scratch
}

// findPath returns the span of the value at path inside the valid JSON value
// starting at b[i]: each element names an object key, or, when the value at
// that point is an array, an index written in decimal. The first matching key
// wins when an object repeats one. ok is false when the path is absent.
func findPath(b []byte, i int, path []string, scratch []byte) (start, end int, ok bool, _ []byte) {
	for _, seg := range path {
		i = skipSpace(b, i)
		switch b[i] {
		case '{':
			found := false
			for j := i + 1; ; {
				m, next, more := nextMember(b, j)
				if !more {
					break
				}
				var is bool
				if is, scratch = keyIs(b[m.keyStart:m.keyEnd], seg, scratch); is {
					i, found = m.valStart, true
					break
				}
				j = next
			}
			if !found {
				return 0, 0, false, scratch
			}
		case '[':
			n, okIdx := parseIndex(seg)
			if !okIdx {
				return 0, 0, false, scratch
			}
			j := skipSpace(b, i+1)
			if b[j] == ']' {
				return 0, 0, false, scratch
			}
			for ; n > 0; n-- {
				j = skipSpace(b, skipValue(b, j))
				if b[j] == ']' {
					return 0, 0, false, scratch
				}
				j = skipSpace(b, j+1) // ','
			}
			i = j
		default:
			return 0, 0, false, scratch
		}
	}
	return i, skipValue(b, i), true, scratch
}

func parseIndex(s string) (int, bool) {
	if s == "" || len(s) > 9 {
		return 0, false
	}
	n := 0
	for _, c := range []byte(s) {
		if c < '0' || c > '9' {
			return 0, false
		}
		n = n*10 + int(c-'0')
	}
	return n, true
}

// appendUnescaped appends the decoded contents of a valid JSON string's inner
// bytes (without quotes) to dst. Unpaired surrogates become U+FFFD, as
// encoding/json does; other bytes are copied as they are.
func appendUnescaped(dst, s []byte) []byte {
	for len(s) > 0 {
		j := bytes.IndexByte(s, '\\')
		if j < 0 {
			return append(dst, s...)
		}
		dst = append(dst, s[:j]...)
		s = s[j:]
		c := s[1]
		switch c {
		case 'u':
			r := rune(hex4(s[2:6]))
			s = s[6:]
			if utf16.IsSurrogate(r) {
				if len(s) >= 6 && s[0] == '\\' && s[1] == 'u' && isHex4(s[2:6]) {
					if r2 := utf16.DecodeRune(r, rune(hex4(s[2:6]))); r2 != utf8.RuneError {
						r = r2
						s = s[6:]
					} else {
						r = utf8.RuneError
					}
				} else {
					r = utf8.RuneError
				}
			}
			dst = utf8.AppendRune(dst, r)
			continue
		case 'b':
			c = '\b'
		case 'f':
			c = '\f'
		case 'n':
			c = '\n'
		case 'r':
			c = '\r'
		case 't':
			c = '\t'
		}
		dst = append(dst, c)
		s = s[2:]
	}
	return dst
}

// appendByteArray appends to dst the bytes that the JSON array starting at
// b[i] (a valid value) spells as integers from 0 to 255. journalctl -o json
// writes a field that holds control characters or is not valid UTF-8 that
// way (systemd's "Journal JSON Format" in docs/JOURNAL_EXPORT_FORMATS.md).
// For an empty array, or one with any other element, it reports false and
// returns dst unchanged.
func appendByteArray(dst, b []byte, i int) ([]byte, bool) {
	n0 := len(dst)
	i = skipSpace(b, i+1)
	for {
		v, digits := 0, 0
		for ; i < len(b) && b[i] >= '0' && b[i] <= '9' && digits <= 3; i++ {
			v = v*10 + int(b[i]-'0')
			digits++
		}
		if digits == 0 || v > 255 {
			return dst[:n0], false
		}
		dst = append(dst, byte(v))
		i = skipSpace(b, i)
		switch b[i] {
		case ',':
			i = skipSpace(b, i+1)
		case ']':
			return dst, true
		default: // a fraction or an exponent
			return dst[:n0], false
		}
	}
}

func hex4(h []byte) int {
	n := 0
	for _, c := range h[:4] {
		switch {
		case c >= '0' && c <= '9':
			c -= '0'
		case c >= 'a' && c <= 'f':
			c -= 'a' - 10
		default:
			c -= 'A' - 10
		}
		n = n<<4 | int(c)
	}
	return n
}

// appendString appends s as a JSON string. Invalid UTF-8 becomes U+FFFD and
// control characters are escaped, so the result is always valid JSON.
func appendString(dst, s []byte) []byte {
	const hex = "0123456789abcdef"
	dst = append(dst, '"')
	start := 0
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' {
				i++
				continue
			}
			dst = append(dst, s[start:i]...)
			switch c {
			case '"', '\\':
				dst = append(dst, '\\', c)
			case '\n':
				dst = append(dst, '\\', 'n')
			case '\r':
				dst = append(dst, '\\', 'r')
			case '\t':
				dst = append(dst, '\\', 't')
			default:
				dst = append(dst, '\\', 'u', '0', '0', hex[c>>4], hex[c&15])
			}
			i++
			start = i
			continue
		}
		r, n := utf8.DecodeRune(s[i:])
		if r == utf8.RuneError && n == 1 {
			dst = append(dst, s[start:i]...)
			dst = append(dst, "\ufffd"...)
			i++
			start = i
			continue
		}
		i += n
	}
	dst = append(dst, s[start:]...)
	return append(dst, '"')
}
