package stream

import "bytes"

// nextLine returns the record that starts at b[i]: its content without the
// line terminator, the terminator ("\n", "\r\n", or empty at the end of b
// when b does not end with a newline) and the offset of the next record.
// A lone '\r' inside a line is content; only "\r\n" is a CRLF terminator.
func nextLine(b []byte, i int) (line, term []byte, next int) {
	j := bytes.IndexByte(b[i:], '\n')
	if j < 0 {
		return b[i:], nil, len(b)
	}
	end := i + j
	start := end
	if end > i && b[end-1] == '\r' {
		start--
	}
	return b[i:start], b[start : end+1], end + 1
}

// isBlank reports whether a line holds only spaces and tabs.
func isBlank(line []byte) bool {
	for _, c := range line {
		if c != ' ' && c != '\t' {
			return false
		}
	}
	return true
}

// recordSeparator is the ASCII RS byte that JSON text sequences (RFC 7464),
// such as journalctl -o json-seq writes, put before each record.
const recordSeparator = 0x1E

// seqPrefix returns the length of a line's leading record separator: 1 when
// the line starts with one, else 0. The separator stays part of the record's
// bytes; the JSON object starts after it.
func seqPrefix(line []byte) int {
	if len(line) > 0 && line[0] == recordSeparator {
		return 1
	}
	return 0
}

// looksJSON reports whether a line's first byte after spaces and tabs (and
// after a leading record separator) is '{': the rule --format auto uses.
func looksJSON(line []byte) bool {
	for _, c := range line[seqPrefix(line):] {
		if c != ' ' && c != '\t' {
			return c == '{'
		}
	}
	return false
}
