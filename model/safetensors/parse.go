package safetensors

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"unicode/utf8"
)

// Parse parses a safetensors file held in b. The tensors come in
// header order, their Data aliasing b. It checks, in this order: the header
// length against MaxHeader and len(b); at most MaxEntries tensors and
// metadata keys, as it reads them; that the header is UTF-8 JSON of the
// specified form with no duplicate keys at any level; every dtype; every
// shape against its byte range (with overflow checks); and that the byte
// ranges, sorted, cover the data buffer exactly with no hole or overlap.
// The data buffer need not be aligned: ViewF32 and its kin view a tensor
// in place where its memory is aligned and copy it where not. Errors are
// *Error. Memory allocated is proportional to the header, never to the
// sizes it claims.
func Parse(b []byte) (meta map[string]string, tensors []Tensor, err error) {
	header, data, err := splitContainer(b)
	if err != nil {
		return nil, nil, err
	}
	meta, tensors, ranges, err := parseHeader(header, uint64(len(data)))
	if err != nil {
		return nil, nil, err
	}
	if err := checkCoverage(tensors, ranges, uint64(len(data))); err != nil {
		return nil, nil, err
	}
	for i := range tensors {
		tensors[i].Data = data[ranges[i][0]:ranges[i][1]:ranges[i][1]]
	}
	return meta, tensors, nil
}

// splitContainer checks the header length and cuts b into header and data.
func splitContainer(b []byte) (header, data []byte, err error) {
	if len(b) < 8 {
		return nil, nil, newErr("", ErrTooShort, "%d bytes, need at least 8", len(b))
	}
	n := binary.LittleEndian.Uint64(b)
	if n > MaxHeader {
		return nil, nil, newErr("", ErrHeaderTooLarge, "%d bytes, limit %d", n, MaxHeader)
	}
	if n > uint64(len(b)-8) {
		return nil, nil, newErr("", ErrTruncated, "header of %d bytes, but only %d bytes follow the length", n, len(b)-8)
	}
	return b[8 : 8+n], b[8+n:], nil
}

// checkCoverage checks that the byte ranges, sorted by start, tile
// [0, size) exactly.
func checkCoverage(tensors []Tensor, ranges [][2]uint64, size uint64) error {
	order := make([]int, len(ranges))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		if c := cmpUint(ranges[a][0], ranges[b][0]); c != 0 {
			return c
		}
		return cmpUint(ranges[a][1], ranges[b][1])
	})
	at := uint64(0)
	for _, i := range order {
		r := ranges[i]
		switch {
		case r[0] > at:
			return newErr(tensors[i].Name, ErrOffsets, "hole in the data buffer at [%d, %d)", at, r[0])
		case r[0] < at:
			return newErr(tensors[i].Name, ErrOffsets, "bytes [%d, %d) overlap another tensor", r[0], min(at, r[1]))
		}
		at = r[1]
	}
	if at != size {
		return newErr("", ErrOffsets, "%d trailing bytes after the last tensor", size-at)
	}
	return nil
}

func cmpUint(a, b uint64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// headerParser walks the header with a streaming token decoder, because
// encoding/json's Unmarshal keeps the last of duplicate keys silently.
type headerParser struct {
	dec *json.Decoder
}

func (p *headerParser) fail(tensor string, err error) *Error {
	var se *json.SyntaxError
	switch {
	case errors.As(err, &se):
		return newErr(tensor, ErrHeader, "%v at byte %d", err, se.Offset)
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		return newErr(tensor, ErrHeader, "unexpected end of header")
	}
	return newErr(tensor, ErrHeader, "%v", err)
}

func (p *headerParser) delim(tensor string, want json.Delim) *Error {
	t, err := p.dec.Token()
	if err != nil {
		return p.fail(tensor, err)
	}
	if d, ok := t.(json.Delim); !ok || d != want {
		return newErr(tensor, ErrHeader, "expected %q, found %s", want, describeToken(t))
	}
	return nil
}

func (p *headerParser) str(tensor string) (string, *Error) {
	t, err := p.dec.Token()
	if err != nil {
		return "", p.fail(tensor, err)
	}
	s, ok := t.(string)
	if !ok {
		return "", newErr(tensor, ErrHeader, "expected a string, found %s", describeToken(t))
	}
	return s, nil
}

// uint reads a JSON number that must be a non-negative integer of at most
// 63 bits (so it fits an int on 64-bit hosts).
func (p *headerParser) uint(tensor string) (uint64, *Error) {
	t, err := p.dec.Token()
	if err != nil {
		return 0, p.fail(tensor, err)
	}
	n, ok := t.(json.Number)
	if !ok {
		return 0, newErr(tensor, ErrHeader, "expected a number, found %s", describeToken(t))
	}
	v, err := strconv.ParseUint(string(n), 10, 63)
	if err != nil || v > uint64(maxInt) {
		return 0, newErr(tensor, ErrHeader, "%s is not a non-negative integer that fits in an int", n)
	}
	return v, nil
}

const maxInt = int(^uint(0) >> 1)

func describeToken(t json.Token) string {
	switch v := t.(type) {
	case json.Delim:
		return strconv.Quote(v.String())
	case string:
		return "string " + quoteCapped(v)
	case json.Number:
		return "number " + string(v)
	case bool:
		return "boolean"
	case nil:
		return "null"
	}
	return fmt.Sprintf("%v", t)
}

// parseHeader parses the JSON header. ranges[i] is tensor i's byte range,
// already checked against dataLen and its shape.
func parseHeader(h []byte, dataLen uint64) (meta map[string]string, tensors []Tensor, ranges [][2]uint64, ferr error) {
	if !utf8.Valid(h) {
		return nil, nil, nil, newErr("", ErrHeader, "not valid UTF-8")
	}
	if len(h) == 0 || h[0] != '{' {
		return nil, nil, nil, newErr("", ErrHeader, "does not start with '{'")
	}
	dec := json.NewDecoder(bytes.NewReader(h))
	dec.UseNumber()
	p := &headerParser{dec: dec}
	if err := p.delim("", '{'); err != nil {
		return nil, nil, nil, err
	}
	seen := map[string]bool{}
	for dec.More() {
		name, err := p.str("")
		if err != nil {
			return nil, nil, nil, err
		}
		if seen[name] {
			return nil, nil, nil, newErr(name, ErrDuplicateKey, "")
		}
		seen[name] = true
		if name == MetadataKey {
			if meta, err = p.metadata(); err != nil {
				return nil, nil, nil, err
			}
			continue
		}
		if len(tensors) == MaxEntries {
			return nil, nil, nil, newErr(name, ErrEntries, "more than %d tensors", MaxEntries)
		}
		t, r, err := p.tensor(name, dataLen)
		if err != nil {
			return nil, nil, nil, err
		}
		tensors = append(tensors, t)
		ranges = append(ranges, r)
	}
	if err := p.delim("", '}'); err != nil {
		return nil, nil, nil, err
	}
	// Only whitespace (the format pads with spaces) may follow.
	if t, err := dec.Token(); err != io.EOF {
		if err != nil {
			return nil, nil, nil, p.fail("", err)
		}
		return nil, nil, nil, newErr("", ErrHeader, "%s after the header object", describeToken(t))
	}
	if meta == nil {
		meta = map[string]string{}
	}
	return meta, tensors, ranges, nil
}

func (p *headerParser) metadata() (map[string]string, *Error) {
	if err := p.delim(MetadataKey, '{'); err != nil {
		return nil, err
	}
	meta := map[string]string{}
	for p.dec.More() {
		k, err := p.str(MetadataKey)
		if err != nil {
			return nil, err
		}
		if _, dup := meta[k]; dup {
			return nil, newErr(MetadataKey, ErrDuplicateKey, "%s", quoteCapped(k))
		}
		if len(meta) == MaxEntries {
			return nil, newErr(MetadataKey, ErrEntries, "more than %d keys", MaxEntries)
		}
		v, err := p.str(MetadataKey)
		if err != nil {
			return nil, err
		}
		meta[k] = v
	}
	return meta, p.delim(MetadataKey, '}')
}

func (p *headerParser) tensor(name string, dataLen uint64) (Tensor, [2]uint64, *Error) {
	t := Tensor{Name: name}
	var r [2]uint64
	if err := p.delim(name, '{'); err != nil {
		return t, r, err
	}
	var haveDType, haveShape, haveOffsets bool
	for p.dec.More() {
		k, err := p.str(name)
		if err != nil {
			return t, r, err
		}
		switch k {
		case "dtype":
			if haveDType {
				return t, r, newErr(name, ErrDuplicateKey, "%s", quoteCapped(k))
			}
			haveDType = true
			s, err := p.str(name)
			if err != nil {
				return t, r, err
			}
			t.DType = DType(s)
		case "shape":
			if haveShape {
				return t, r, newErr(name, ErrDuplicateKey, "%s", quoteCapped(k))
			}
			haveShape = true
			if err := p.delim(name, '['); err != nil {
				return t, r, err
			}
			t.Shape = []int{}
			for p.dec.More() {
				d, err := p.uint(name)
				if err != nil {
					return t, r, err
				}
				t.Shape = append(t.Shape, int(d))
			}
			if err := p.delim(name, ']'); err != nil {
				return t, r, err
			}
		case "data_offsets":
			if haveOffsets {
				return t, r, newErr(name, ErrDuplicateKey, "%s", quoteCapped(k))
			}
			haveOffsets = true
			if err := p.delim(name, '['); err != nil {
				return t, r, err
			}
			for i := range r {
				if r[i], err = p.uint(name); err != nil {
					return t, r, err
				}
			}
			if err := p.delim(name, ']'); err != nil {
				return t, r, newErr(name, ErrHeader, "data_offsets must be [begin, end]")
			}
		default:
			return t, r, newErr(name, ErrHeader, "unknown field %s", quoteCapped(k))
		}
	}
	if err := p.delim(name, '}'); err != nil {
		return t, r, err
	}
	switch {
	case !haveDType:
		return t, r, newErr(name, ErrHeader, "no dtype")
	case !haveShape:
		return t, r, newErr(name, ErrHeader, "no shape")
	case !haveOffsets:
		return t, r, newErr(name, ErrHeader, "no data_offsets")
	}
	if t.DType.Size() == 0 {
		return t, r, newErr(name, ErrDType, "%s", quoteCapped(string(t.DType)))
	}
	if r[0] > r[1] || r[1] > dataLen {
		return t, r, newErr(name, ErrOffsets, "[%d, %d] outside the %d-byte data buffer", r[0], r[1], dataLen)
	}
	n, ok := ByteSize(t.DType, t.Shape)
	if !ok {
		return t, r, newErr(name, ErrShape, "%s %v overflows", t.DType, t.Shape)
	}
	if n != r[1]-r[0] {
		return t, r, newErr(name, ErrShape, "%s %v needs %d bytes, range has %d", t.DType, t.Shape, n, r[1]-r[0])
	}
	return t, r, nil
}
