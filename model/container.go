package model

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math/bits"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"
)

// The container is a safetensors file, per the format's open specification:
// an 8-byte little-endian header length N, N bytes of UTF-8 JSON mapping
// each tensor name to {"dtype", "shape", "data_offsets": [begin, end]} plus
// an optional "__metadata__" map of strings, then one data buffer that the
// tensors' byte ranges cover exactly.

// MaxHeader is the largest header ParseContainer accepts. The reference
// implementation of the format uses the same 100 MB cap.
const MaxHeader = 100_000_000

// MaxEntries is the most tensors, and the most metadata keys, a header
// may list. A convtag model has at most 57 tensors (3 vocabulary tensors,
// the embedding, a weight, a bias and a fold table for each of at most 16
// widths, 2 hidden, 2 output, the baseline) and about 10 metadata keys;
// 4096 leaves room for any model a later version may write and for other
// safetensors files, while a crafted header of a million entries is
// refused after reading a few hundred kilobytes instead of seconds of
// parsing and hundreds of megabytes of tensor records.
const MaxEntries = 4096

// metadataKey is the header key of the string map; no tensor may use it.
const metadataKey = "__metadata__"

// Errors that the loader reports, wrapped in a *FormatError with the file
// and tensor and a detail; test for them with errors.Is.
var (
	ErrTooShort         = errors.New("model: file too short")
	ErrHeaderTooLarge   = errors.New("model: header too large")
	ErrTruncated        = errors.New("model: file truncated")
	ErrHeader           = errors.New("model: malformed header")
	ErrEntries          = errors.New("model: too many header entries")
	ErrDuplicateKey     = errors.New("model: duplicate key in header")
	ErrDType            = errors.New("model: unknown dtype")
	ErrShape            = errors.New("model: shape does not match byte range")
	ErrOffsets          = errors.New("model: bad data offsets")
	ErrMisaligned       = errors.New("model: tensor misaligned")
	ErrNotModel         = errors.New("model: not a convtag model")
	ErrVersion          = errors.New("model: unsupported format version")
	ErrMetadata         = errors.New("model: bad metadata")
	ErrMissingTensor    = errors.New("model: missing tensor")
	ErrUnexpectedTensor = errors.New("model: unexpected tensor")
	ErrSchema           = errors.New("model: tensor does not fit the model")
	ErrVocab            = errors.New("model: bad vocabulary")
	ErrNotFinite        = errors.New("model: weight is NaN or infinite")
	ErrForward          = errors.New("model: forward pass gives no probabilities")
	ErrBaseline         = errors.New("model: bad baseline")
	ErrNoChecksum       = errors.New("model: no checksum")
	ErrChecksum         = errors.New("model: checksum mismatch")
)

// FormatError is a problem with a model file's bytes. File is the file name
// (empty when parsing bytes with no name), Tensor the tensor concerned (or
// empty), and Err wraps one of the Err* sentinels with a detail.
type FormatError struct {
	File   string
	Tensor string
	Err    error
}

// Error is one line: "model: FILE: tensor NAME: problem: detail".
func (e *FormatError) Error() string {
	var b strings.Builder
	b.WriteString("model: ")
	if e.File != "" {
		b.WriteString(e.File)
		b.WriteString(": ")
	}
	if e.Tensor != "" {
		b.WriteString("tensor ")
		b.WriteString(quoteCapped(e.Tensor))
		b.WriteString(": ")
	}
	if e.Err == nil {
		b.WriteString("bad model file")
		return b.String()
	}
	// The sentinels carry the package prefix already written above.
	b.WriteString(strings.TrimPrefix(e.Err.Error(), "model: "))
	return b.String()
}

func (e *FormatError) Unwrap() error { return e.Err }

// quoteCap is how many bytes of a value from the file an error quotes: a
// crafted name or label may be megabytes long, an error is one line.
const quoteCap = 200

// quoteCapped quotes s as strconv.Quote does, cut after quoteCap bytes (at
// a rune boundary) and then marked with "…".
func quoteCapped(s string) string {
	if len(s) <= quoteCap {
		return strconv.Quote(s)
	}
	cut := quoteCap
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return strconv.Quote(s[:cut]) + "…"
}

func formatErr(tensor string, sentinel error, format string, args ...any) *FormatError {
	err := sentinel
	if format != "" {
		err = fmt.Errorf("%w: "+format, append([]any{sentinel}, args...)...)
	}
	return &FormatError{Tensor: tensor, Err: err}
}

// Tensor is one named tensor of a container. Data is its little-endian bytes
// (len = product of Shape × DTypeSize(DType)); after ParseContainer it
// aliases the parsed buffer and must not be written.
type Tensor struct {
	Name  string
	DType string
	Shape []int
	Data  []byte
}

// DTypeSize is the size in bytes of one element of the safetensors dtype,
// or 0 when the dtype is unknown to this package.
func DTypeSize(dtype string) int {
	switch dtype {
	case "BOOL", "U8", "I8", "F8_E5M2", "F8_E4M3":
		return 1
	case "I16", "U16", "F16", "BF16":
		return 2
	case "I32", "U32", "F32":
		return 4
	case "I64", "U64", "F64":
		return 8
	}
	return 0
}

// byteSize is the byte length of a tensor of the given shape and element
// size, or ok == false when it does not fit in 64 bits.
func byteSize(shape []int, size int) (n uint64, ok bool) {
	n = uint64(size)
	for _, d := range shape {
		if d < 0 {
			return 0, false
		}
		hi, lo := bits.Mul64(n, uint64(d))
		if hi != 0 {
			return 0, false
		}
		n = lo
	}
	return n, true
}

// ParseContainer parses a safetensors file held in b. The tensors come in
// header order, their Data aliasing b. It checks, in this order: the header
// length against MaxHeader and len(b); at most MaxEntries tensors and
// metadata keys, as it reads them; that the header is UTF-8 JSON of the
// specified form with no duplicate keys at any level; every dtype; every
// shape against its byte range (with overflow checks); and that the byte
// ranges, sorted, cover the data buffer exactly with no hole or overlap.
// The data buffer need not be aligned. Errors are *FormatError. Memory
// allocated is proportional to the header, never to the sizes it claims.
func ParseContainer(b []byte) (meta map[string]string, tensors []Tensor, err error) {
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
		return nil, nil, formatErr("", ErrTooShort, "%d bytes, need at least 8", len(b))
	}
	n := binary.LittleEndian.Uint64(b)
	if n > MaxHeader {
		return nil, nil, formatErr("", ErrHeaderTooLarge, "%d bytes, limit %d", n, MaxHeader)
	}
	if n > uint64(len(b)-8) {
		return nil, nil, formatErr("", ErrTruncated, "header of %d bytes, but only %d bytes follow the length", n, len(b)-8)
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
			return formatErr(tensors[i].Name, ErrOffsets, "hole in the data buffer at [%d, %d)", at, r[0])
		case r[0] < at:
			return formatErr(tensors[i].Name, ErrOffsets, "bytes [%d, %d) overlap another tensor", r[0], min(at, r[1]))
		}
		at = r[1]
	}
	if at != size {
		return formatErr("", ErrOffsets, "%d trailing bytes after the last tensor", size-at)
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

func (p *headerParser) fail(tensor string, err error) *FormatError {
	var se *json.SyntaxError
	switch {
	case errors.As(err, &se):
		return formatErr(tensor, ErrHeader, "%v at byte %d", err, se.Offset)
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		return formatErr(tensor, ErrHeader, "unexpected end of header")
	}
	return formatErr(tensor, ErrHeader, "%v", err)
}

func (p *headerParser) delim(tensor string, want json.Delim) *FormatError {
	t, err := p.dec.Token()
	if err != nil {
		return p.fail(tensor, err)
	}
	if d, ok := t.(json.Delim); !ok || d != want {
		return formatErr(tensor, ErrHeader, "expected %q, found %s", want, describeToken(t))
	}
	return nil
}

func (p *headerParser) str(tensor string) (string, *FormatError) {
	t, err := p.dec.Token()
	if err != nil {
		return "", p.fail(tensor, err)
	}
	s, ok := t.(string)
	if !ok {
		return "", formatErr(tensor, ErrHeader, "expected a string, found %s", describeToken(t))
	}
	return s, nil
}

// uint reads a JSON number that must be a non-negative integer of at most
// 63 bits (so it fits an int on 64-bit hosts).
func (p *headerParser) uint(tensor string) (uint64, *FormatError) {
	t, err := p.dec.Token()
	if err != nil {
		return 0, p.fail(tensor, err)
	}
	n, ok := t.(json.Number)
	if !ok {
		return 0, formatErr(tensor, ErrHeader, "expected a number, found %s", describeToken(t))
	}
	v, err := strconv.ParseUint(string(n), 10, 63)
	if err != nil || v > uint64(maxInt) {
		return 0, formatErr(tensor, ErrHeader, "%s is not a non-negative integer that fits in an int", n)
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
		return nil, nil, nil, formatErr("", ErrHeader, "not valid UTF-8")
	}
	if len(h) == 0 || h[0] != '{' {
		return nil, nil, nil, formatErr("", ErrHeader, "does not start with '{'")
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
			return nil, nil, nil, formatErr(name, ErrDuplicateKey, "")
		}
		seen[name] = true
		if name == metadataKey {
			if meta, err = p.metadata(); err != nil {
				return nil, nil, nil, err
			}
			continue
		}
		if len(tensors) == MaxEntries {
			return nil, nil, nil, formatErr(name, ErrEntries, "more than %d tensors", MaxEntries)
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
		return nil, nil, nil, formatErr("", ErrHeader, "%s after the header object", describeToken(t))
	}
	if meta == nil {
		meta = map[string]string{}
	}
	return meta, tensors, ranges, nil
}

func (p *headerParser) metadata() (map[string]string, *FormatError) {
	if err := p.delim(metadataKey, '{'); err != nil {
		return nil, err
	}
	meta := map[string]string{}
	for p.dec.More() {
		k, err := p.str(metadataKey)
		if err != nil {
			return nil, err
		}
		if _, dup := meta[k]; dup {
			return nil, formatErr(metadataKey, ErrDuplicateKey, "%s", quoteCapped(k))
		}
		if len(meta) == MaxEntries {
			return nil, formatErr(metadataKey, ErrEntries, "more than %d keys", MaxEntries)
		}
		v, err := p.str(metadataKey)
		if err != nil {
			return nil, err
		}
		meta[k] = v
	}
	return meta, p.delim(metadataKey, '}')
}

func (p *headerParser) tensor(name string, dataLen uint64) (Tensor, [2]uint64, *FormatError) {
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
				return t, r, formatErr(name, ErrDuplicateKey, "%s", quoteCapped(k))
			}
			haveDType = true
			if t.DType, err = p.str(name); err != nil {
				return t, r, err
			}
		case "shape":
			if haveShape {
				return t, r, formatErr(name, ErrDuplicateKey, "%s", quoteCapped(k))
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
				return t, r, formatErr(name, ErrDuplicateKey, "%s", quoteCapped(k))
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
				return t, r, formatErr(name, ErrHeader, "data_offsets must be [begin, end]")
			}
		default:
			return t, r, formatErr(name, ErrHeader, "unknown field %s", quoteCapped(k))
		}
	}
	if err := p.delim(name, '}'); err != nil {
		return t, r, err
	}
	switch {
	case !haveDType:
		return t, r, formatErr(name, ErrHeader, "no dtype")
	case !haveShape:
		return t, r, formatErr(name, ErrHeader, "no shape")
	case !haveOffsets:
		return t, r, formatErr(name, ErrHeader, "no data_offsets")
	}
	size := DTypeSize(t.DType)
	if size == 0 {
		return t, r, formatErr(name, ErrDType, "%s", quoteCapped(t.DType))
	}
	if r[0] > r[1] || r[1] > dataLen {
		return t, r, formatErr(name, ErrOffsets, "[%d, %d] outside the %d-byte data buffer", r[0], r[1], dataLen)
	}
	n, ok := byteSize(t.Shape, size)
	if !ok {
		return t, r, formatErr(name, ErrShape, "%s %v overflows", t.DType, t.Shape)
	}
	if n != r[1]-r[0] {
		return t, r, formatErr(name, ErrShape, "%s %v needs %d bytes, range has %d", t.DType, t.Shape, n, r[1]-r[0])
	}
	return t, r, nil
}

// EncodeContainer writes a safetensors file holding meta and the tensors,
// packed in the given order. The header lists __metadata__ first (keys
// sorted) and then the tensors in order, and is padded with spaces so the
// data buffer starts at a multiple of 8 bytes; the same input always gives
// the same bytes. It fails, writing nothing, when a tensor's Data does not
// match its dtype and shape, a name repeats, or a tensor would start at an
// offset that is not a multiple of its element size (up to 8): reorder the
// tensors, largest elements first, to avoid that.
func EncodeContainer(w io.Writer, meta map[string]string, tensors []Tensor) error {
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
		h = appendJSONString(h, metadataKey)
		h = append(h, ":{"...)
		keys := make([]string, 0, len(meta))
		for k := range meta {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for i, k := range keys {
			if !utf8.ValidString(k) || !utf8.ValidString(meta[k]) {
				return nil, formatErr(metadataKey, ErrMetadata, "key %q: not valid UTF-8", k)
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
		case t.Name == metadataKey:
			return nil, formatErr(t.Name, ErrHeader, "reserved name")
		case seen[t.Name]:
			return nil, formatErr(t.Name, ErrDuplicateKey, "")
		case !utf8.ValidString(t.Name):
			return nil, formatErr(t.Name, ErrHeader, "name is not valid UTF-8")
		}
		seen[t.Name] = true
		size := DTypeSize(t.DType)
		if size == 0 {
			return nil, formatErr(t.Name, ErrDType, "%q", t.DType)
		}
		n, ok := byteSize(t.Shape, size)
		if !ok || n != uint64(len(t.Data)) {
			return nil, formatErr(t.Name, ErrShape, "%s %v, data has %d bytes", t.DType, t.Shape, len(t.Data))
		}
		if n > 0 && at%uint64(size) != 0 {
			return nil, formatErr(t.Name, ErrMisaligned, "%s at offset %d", t.DType, at)
		}
		if i > 0 || len(meta) > 0 {
			h = append(h, ',')
		}
		h = appendJSONString(h, t.Name)
		h = append(h, `:{"dtype":`...)
		h = appendJSONString(h, t.DType)
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
		return nil, formatErr("", ErrHeaderTooLarge, "%d bytes, limit %d", len(h), MaxHeader)
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

// checkNoDuplicateKeys reports the first object in the JSON document data
// that repeats a key.
func checkNoDuplicateKeys(data []byte) error {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.UseNumber()
	// One entry per open container: the keys seen so far, or nil for an
	// array.
	var stack []map[string]bool
	expectKey := false
	for {
		t, err := dec.Token()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
		if expectKey {
			expectKey = false
			if k, ok := t.(string); ok {
				top := stack[len(stack)-1]
				if top[k] {
					return fmt.Errorf("duplicate key %q", k)
				}
				top[k] = true
				continue
			}
		}
		switch t {
		case json.Delim('{'):
			stack = append(stack, map[string]bool{})
		case json.Delim('['):
			stack = append(stack, nil)
		case json.Delim('}'), json.Delim(']'):
			stack = stack[:len(stack)-1]
		}
		// The next token is a key when the innermost container is an object.
		expectKey = len(stack) > 0 && stack[len(stack)-1] != nil
	}
}
