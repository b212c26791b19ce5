package safetensors

import (
	"encoding/binary"
	"io"
	"slices"
	"strconv"
	"unicode/utf8"
)

// Encode writes a safetensors file holding meta and the tensors,
// packed in the given order. The header lists __metadata__ first (keys
// sorted) and then the tensors in order, and is padded with spaces so the
// data buffer starts at a multiple of 8 bytes; the same input always gives
// the same bytes. It fails, writing nothing, when a tensor's Data does not
// match its dtype and shape, a name repeats, or a tensor would start at an
// offset that is not a multiple of its element size (up to 8): reorder the
// tensors, largest elements first, to avoid that. Those errors are *Error;
// a write error is returned as the writer gave it.
func Encode(w io.Writer, meta map[string]string, tensors []Tensor) error {
	h, err := encodeHeader(meta, tensors)
	if err != nil {
		return err
	}
	var n [8]byte
	binary.LittleEndian.PutUint64(n[:], uint64(len(h)))
	if _, err := w.Write(n[:]); err != nil {
		return err
	}
	if _, err := w.Write(h); err != nil {
		return err
	}
	for _, t := range tensors {
		if _, err := w.Write(t.Data); err != nil {
			return err
		}
	}
	return nil
}

// encodeHeader returns the padded JSON header for meta and tensors.
func encodeHeader(meta map[string]string, tensors []Tensor) ([]byte, error) {
	h := []byte{'{'}
	if len(meta) > 0 {
		h = appendJSONString(h, MetadataKey)
		h = append(h, ":{"...)
		keys := make([]string, 0, len(meta))
		for k := range meta {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for i, k := range keys {
			if !utf8.ValidString(k) || !utf8.ValidString(meta[k]) {
				return nil, newErr(MetadataKey, ErrMetadata, "key %q: not valid UTF-8", k)
			}
			if i > 0 {
				h = append(h, ',')
			}
			h = appendJSONString(h, k)
			h = append(h, ':')
			h = appendJSONString(h, meta[k])
		}
		h = append(h, '}')
	}
	seen := make(map[string]bool, len(tensors))
	at := uint64(0)
	for i, t := range tensors {
		switch {
		case t.Name == MetadataKey:
			return nil, newErr(t.Name, ErrHeader, "reserved name")
		case seen[t.Name]:
			return nil, newErr(t.Name, ErrDuplicateKey, "")
		case !utf8.ValidString(t.Name):
			return nil, newErr(t.Name, ErrHeader, "name is not valid UTF-8")
		}
		seen[t.Name] = true
		size := t.DType.Size()
		if size == 0 {
			return nil, newErr(t.Name, ErrDType, "%s", quoteCapped(string(t.DType)))
		}
		n, ok := ByteSize(t.DType, t.Shape)
		if !ok || n != uint64(len(t.Data)) {
			return nil, newErr(t.Name, ErrShape, "%s %v, data has %d bytes", t.DType, t.Shape, len(t.Data))
		}
		if n > 0 && at%uint64(size) != 0 {
			return nil, newErr(t.Name, ErrMisaligned, "%s at offset %d", t.DType, at)
		}
		if i > 0 || len(meta) > 0 {
			h = append(h, ',')
		}
		h = appendJSONString(h, t.Name)
		h = append(h, `:{"dtype":`...)
		h = appendJSONString(h, string(t.DType))
		h = append(h, `,"shape":[`...)
		for j, d := range t.Shape {
			if j > 0 {
				h = append(h, ',')
			}
			h = strconv.AppendInt(h, int64(d), 10)
		}
		h = append(h, `],"data_offsets":[`...)
		h = strconv.AppendUint(h, at, 10)
		h = append(h, ',')
		at += n
		h = strconv.AppendUint(h, at, 10)
		h = append(h, "]}"...)
	}
	h = append(h, '}')
	for (8+len(h))%8 != 0 {
		h = append(h, ' ')
	}
	if len(h) > MaxHeader {
		return nil, newErr("", ErrHeaderTooLarge, "%d bytes, limit %d", len(h), MaxHeader)
	}
	return h, nil
}

// appendJSONString appends s as a JSON string, escaping only what JSON
// requires (quote, backslash, control characters), so the output does not
// depend on any encoder's optional escaping.
func appendJSONString(dst []byte, s string) []byte {
	const hex = "0123456789abcdef"
	dst = append(dst, '"')
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '"' || c == '\\':
			dst = append(dst, '\\', c)
		case c == '\n':
			dst = append(dst, '\\', 'n')
		case c == '\t':
			dst = append(dst, '\\', 't')
		case c == '\r':
			dst = append(dst, '\\', 'r')
		case c < 0x20:
			dst = append(dst, '\\', 'u', '0', '0', hex[c>>4], hex[c&15])
		default:
			dst = append(dst, c)
		}
	}
	return append(dst, '"')
}
