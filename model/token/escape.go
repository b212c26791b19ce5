package token

import "bytes"

// hasEscape reports whether text may hold a terminal escape sequence: an
// ESC byte, or U+009B or U+009D (C2 9B, C2 9D in UTF-8).
func hasEscape(text []byte) bool {
	if bytes.IndexByte(text, 0x1B) >= 0 {
		return true
	}
	for i := 0; ; {
		j := bytes.IndexByte(text[i:], 0xC2)
		if j < 0 || i+j+1 >= len(text) {
			return false
		}
		i += j + 1
		if c := text[i]; c == 0x9B || c == 0x9D {
			return true
		}
	}
}

// dropEscapes appends src to dst without its complete CSI and OSC
// sequences (ECMA-48, 5th edition, 1991: 5.4 control sequences, 8.3.89
// OSC, 8.3.143 ST; BEL as an OSC terminator is what terminals accept,
// common practice rather than ECMA-48). The 8-bit forms are taken as the
// C1 characters U+009B CSI, U+009D OSC and U+009C ST encoded in UTF-8; a
// lone byte 0x9B is invalid UTF-8 and is left to the clean-up step. A
// sequence that is cut off, or holds a byte outside its ranges, is kept.
func dropEscapes(dst, src []byte) []byte {
	for i := 0; i < len(src); {
		c := src[i]
		var csi bool
		switch {
		case c == 0x1B && i+1 < len(src) && (src[i+1] == '[' || src[i+1] == ']'):
			csi = src[i+1] == '['
		case c == 0xC2 && i+1 < len(src) && (src[i+1] == 0x9B || src[i+1] == 0x9D):
			csi = src[i+1] == 0x9B
		default:
			dst = append(dst, c)
			i++
			continue
		}
		end := 0
		if csi {
			end = csiEnd(src, i+2)
		} else {
			end = oscEnd(src, i+2)
		}
		if end == 0 {
			dst = append(dst, src[i:i+2]...)
			i += 2
			continue
		}
		i = end
	}
	return dst
}

// csiEnd is the end of a control sequence whose parameters start at
// src[j], or 0: parameter bytes 03/00..03/15, intermediate bytes
// 02/00..02/15, then a final byte 04/00..07/14.
func csiEnd(src []byte, j int) int {
	for j < len(src) && src[j] >= 0x30 && src[j] <= 0x3F {
		j++
	}
	for j < len(src) && src[j] >= 0x20 && src[j] <= 0x2F {
		j++
	}
	if j < len(src) && src[j] >= 0x40 && src[j] <= 0x7E {
		return j + 1
	}
	return 0
}

// oscEnd is the end of an operating system command whose command string
// starts at src[j], or 0: the string runs to BEL, ESC "\" or U+009C (ST);
// an ESC that does not start ST, or the end of the text, leaves it
// unterminated.
func oscEnd(src []byte, j int) int {
	for ; j < len(src); j++ {
		switch src[j] {
		case 0x07:
			return j + 1
		case 0x1B:
			if j+1 < len(src) && src[j+1] == '\\' {
				return j + 2
			}
			return 0
		case 0xC2:
			if j+1 < len(src) && src[j+1] == 0x9C {
				return j + 2
			}
		}
	}
	return 0
}
