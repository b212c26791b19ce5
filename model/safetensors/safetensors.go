package safetensors

import (
	"errors"
	"fmt"
	"math/bits"
	"strconv"
	"strings"
	"unicode/utf8"
)

// MaxHeader is the largest header Parse accepts and Encode writes. The
// reference implementation of the format uses the same 100 MB cap.
const MaxHeader = 100_000_000

// MaxEntries is the most tensors, and the most metadata keys, a header may
// list. A convtag model has at most 57 tensors (3 vocabulary tensors, the
// embedding, a weight, a bias and a fold table for each of at most 16
// widths, 2 hidden, 2 output, the baseline) and about 10 metadata keys;
// 4096 leaves room for any model a later version may write and for other
// safetensors files, while a crafted header of a million entries is refused
// after reading a few hundred kilobytes instead of seconds of parsing and
// hundreds of megabytes of tensor records.
const MaxEntries = 4096

// MetadataKey is the header key of the string map; no tensor may use it.
const MetadataKey = "__metadata__"

// DType is a safetensors element type, spelled as in the header.
type DType string

// The dtypes of the specification.
const (
	BOOL   DType = "BOOL"
	U8     DType = "U8"
	I8     DType = "I8"
	F8E5M2 DType = "F8_E5M2"
	F8E4M3 DType = "F8_E4M3"
	I16    DType = "I16"
	U16    DType = "U16"
	F16    DType = "F16"
	BF16   DType = "BF16"
	I32    DType = "I32"
	U32    DType = "U32"
	F32    DType = "F32"
	I64    DType = "I64"
	U64    DType = "U64"
	F64    DType = "F64"
)

// Size is the size in bytes of one element, or 0 for a dtype this package
// does not know.
func (d DType) Size() int {
	switch d {
	case BOOL, U8, I8, F8E5M2, F8E4M3:
		return 1
	case I16, U16, F16, BF16:
		return 2
	case I32, U32, F32:
		return 4
	case I64, U64, F64:
		return 8
	}
	return 0
}

// Tensor is one named tensor of a container. Data is its little-endian
// bytes, len(Data) = ByteSize(DType, Shape). After Parse, Data aliases the
// parsed buffer (capacity cut at its end) and must not be written.
type Tensor struct {
	Name  string
	DType DType
	Shape []int
	Data  []byte
}

// ByteSize is the byte length of a tensor of dtype d and the given shape,
// or ok == false when d is unknown, a dimension is negative or the size
// does not fit in 64 bits.
func ByteSize(d DType, shape []int) (n uint64, ok bool) {
	size := d.Size()
	if size == 0 {
		return 0, false
	}
	n = uint64(size)
	for _, dim := range shape {
		if dim < 0 {
			return 0, false
		}
		hi, lo := bits.Mul64(n, uint64(dim))
		if hi != 0 {
			return 0, false
		}
		n = lo
	}
	return n, true
}

// Errors of Parse and Encode, wrapped in an *Error with the tensor and a
// detail; test for them with errors.Is.
var (
	ErrTooShort       = errors.New("safetensors: file too short")
	ErrHeaderTooLarge = errors.New("safetensors: header too large")
	ErrTruncated      = errors.New("safetensors: file truncated")
	ErrHeader         = errors.New("safetensors: malformed header")
	ErrEntries        = errors.New("safetensors: too many header entries")
	ErrDuplicateKey   = errors.New("safetensors: duplicate key in header")
	ErrDType          = errors.New("safetensors: unknown dtype")
	ErrShape          = errors.New("safetensors: shape does not match byte range")
	ErrOffsets        = errors.New("safetensors: bad data offsets")
	ErrMisaligned     = errors.New("safetensors: tensor misaligned")
	ErrMetadata       = errors.New("safetensors: bad metadata")
)

// Error is a problem with a container. Tensor is the tensor concerned (or
// empty; MetadataKey for the metadata map), and Err wraps one of the Err*
// sentinels with a detail.
type Error struct {
	Tensor string
	Err    error
}

// Error is one line: "safetensors: tensor NAME: problem: detail".
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString("safetensors: ")
	if e.Tensor != "" {
		b.WriteString("tensor ")
		b.WriteString(quoteCapped(e.Tensor))
		b.WriteString(": ")
	}
	if e.Err == nil {
		b.WriteString("bad container")
		return b.String()
	}
	b.WriteString(strings.TrimPrefix(e.Err.Error(), "safetensors: "))
	return b.String()
}

func (e *Error) Unwrap() error { return e.Err }

func newErr(tensor string, sentinel error, format string, args ...any) *Error {
	err := sentinel
	if format != "" {
		err = fmt.Errorf("%w: "+format, append([]any{sentinel}, args...)...)
	}
	return &Error{Tensor: tensor, Err: err}
}

// quoteCap is how many bytes of a value from the file an error quotes: a
// crafted name may be megabytes long, an error is one line.
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
