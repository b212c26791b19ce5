package safetensors

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
)

// stRaw builds a container from a header text and a data buffer, with no
// padding, so tests control every byte.
func stRaw(header string, data []byte) []byte {
	b := binary.LittleEndian.AppendUint64(nil, uint64(len(header)))
	b = append(b, header...)
	return append(b, data...)
}

func TestParse(t *testing.T) {
	f32 := func(v ...float32) []byte {
		var b []byte
		for _, x := range v {
			b = binary.LittleEndian.AppendUint32(b, math.Float32bits(x))
		}
		return b
	}
	// The layout of the format's specification: an 8-byte little-endian
	// length, the JSON header, the data buffer.
	tests := []struct {
		name    string
		in      []byte
		want    []Tensor // on success: names, dtypes, shapes, data
		meta    map[string]string
		err     error
		tensor  string // the tensor the error names, if any
		message string // part of the message
	}{
		{name: "empty object", in: stRaw(`{}`, nil), want: nil, meta: map[string]string{}},
		{name: "one tensor", in: stRaw(`{"a":{"dtype":"F32","shape":[2],"data_offsets":[0,8]}}`, f32(1.5, -2)),
			want: []Tensor{{"a", "F32", []int{2}, f32(1.5, -2)}}, meta: map[string]string{}},
		{name: "metadata and padding", in: stRaw(`{"__metadata__":{"k":"v","e":""},"a":{"dtype":"U8","shape":[],"data_offsets":[0,1]}}   `, []byte{7}),
			want: []Tensor{{"a", "U8", []int{}, []byte{7}}}, meta: map[string]string{"k": "v", "e": ""}},
		{name: "header order differs from data order",
			in:   stRaw(`{"b":{"dtype":"I32","shape":[1],"data_offsets":[4,8]},"a":{"dtype":"F32","shape":[1],"data_offsets":[0,4]}}`, f32(1, 2)),
			want: []Tensor{{"b", "I32", []int{1}, f32(2)}, {"a", "F32", []int{1}, f32(1)}}, meta: map[string]string{}},
		{name: "zero-size tensors", in: stRaw(`{"z":{"dtype":"F64","shape":[0,3],"data_offsets":[0,0]},"a":{"dtype":"F16","shape":[1],"data_offsets":[0,2]},"y":{"dtype":"I8","shape":[0],"data_offsets":[2,2]}}`, []byte{1, 2}),
			want: []Tensor{{"z", "F64", []int{0, 3}, []byte{}}, {"a", "F16", []int{1}, []byte{1, 2}}, {"y", "I8", []int{0}, []byte{}}}, meta: map[string]string{}},
		{name: "escaped names", in: stRaw(`{"a\"\\\n\u00e9":{"dtype":"U8","shape":[1],"data_offsets":[0,1]}}`, []byte{1}),
			want: []Tensor{{"a\"\\\né", "U8", []int{1}, []byte{1}}}, meta: map[string]string{}},

		{name: "short", in: []byte{1, 2, 3}, err: ErrTooShort},
		{name: "huge header length", in: binary.LittleEndian.AppendUint64(nil, 1<<62), err: ErrHeaderTooLarge},
		{name: "header over the cap", in: binary.LittleEndian.AppendUint64(nil, MaxHeader+1), err: ErrHeaderTooLarge},
		{name: "header past the end", in: append(binary.LittleEndian.AppendUint64(nil, 10), "{}"...), err: ErrTruncated},
		{name: "empty header", in: stRaw(``, nil), err: ErrHeader},
		{name: "leading space", in: stRaw(` {}`, nil), err: ErrHeader},
		{name: "not an object", in: stRaw(`[]`, nil), err: ErrHeader},
		{name: "invalid UTF-8", in: stRaw("{\"\xff\":{}}", nil), err: ErrHeader},
		{name: "syntax error", in: stRaw(`{"a":}`, nil), err: ErrHeader, message: "at byte"},
		{name: "cut off", in: stRaw(`{"a":{"dtype":"U8"`, nil), err: ErrHeader},
		{name: "garbage after the object", in: stRaw(`{} x`, nil), err: ErrHeader},
		{name: "second object", in: stRaw(`{}{}`, nil), err: ErrHeader},
		{name: "duplicate tensor", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[0,1]},"a":{"dtype":"U8","shape":[1],"data_offsets":[0,1]}}`, []byte{1}),
			err: ErrDuplicateKey, tensor: "a"},
		{name: "duplicate metadata block", in: stRaw(`{"__metadata__":{},"__metadata__":{}}`, nil), err: ErrDuplicateKey},
		{name: "duplicate metadata key", in: stRaw(`{"__metadata__":{"k":"1","k":"2"}}`, nil), err: ErrDuplicateKey, message: `"k"`},
		{name: "duplicate field", in: stRaw(`{"a":{"dtype":"U8","dtype":"I8","shape":[1],"data_offsets":[0,1]}}`, []byte{1}), err: ErrDuplicateKey, tensor: "a"},
		{name: "metadata number", in: stRaw(`{"__metadata__":{"k":1}}`, nil), err: ErrHeader},
		{name: "metadata null", in: stRaw(`{"__metadata__":null}`, nil), err: ErrHeader},
		{name: "tensor not an object", in: stRaw(`{"a":[1]}`, nil), err: ErrHeader, tensor: "a"},
		{name: "unknown field", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[0,1],"x":1}}`, []byte{1}), err: ErrHeader, tensor: "a"},
		{name: "no dtype", in: stRaw(`{"a":{"shape":[1],"data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader, message: "no dtype"},
		{name: "no shape", in: stRaw(`{"a":{"dtype":"U8","data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader, message: "no shape"},
		{name: "no offsets", in: stRaw(`{"a":{"dtype":"U8","shape":[1]}}`, []byte{1}), err: ErrHeader, message: "no data_offsets"},
		{name: "unknown dtype", in: stRaw(`{"a":{"dtype":"F33","shape":[1],"data_offsets":[0,4]}}`, f32(1)), err: ErrDType, tensor: "a"},
		{name: "lowercase dtype", in: stRaw(`{"a":{"dtype":"f32","shape":[1],"data_offsets":[0,4]}}`, f32(1)), err: ErrDType},
		{name: "negative dimension", in: stRaw(`{"a":{"dtype":"U8","shape":[-1],"data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader},
		{name: "fractional dimension", in: stRaw(`{"a":{"dtype":"U8","shape":[1.0],"data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader},
		{name: "exponent dimension", in: stRaw(`{"a":{"dtype":"U8","shape":[1e0],"data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader},
		{name: "dimension over 63 bits", in: stRaw(`{"a":{"dtype":"U8","shape":[9223372036854775808],"data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader},
		{name: "string dimension", in: stRaw(`{"a":{"dtype":"U8","shape":["1"],"data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader},
		{name: "nested shape", in: stRaw(`{"a":{"dtype":"U8","shape":[[1]],"data_offsets":[0,1]}}`, []byte{1}), err: ErrHeader},
		{name: "shape overflow", in: stRaw(`{"a":{"dtype":"F32","shape":[4294967296,4294967296],"data_offsets":[0,0]}}`, nil), err: ErrShape, tensor: "a", message: "overflows"},
		{name: "shape times size overflow", in: stRaw(`{"a":{"dtype":"F64","shape":[4611686018427387904],"data_offsets":[0,0]}}`, nil), err: ErrShape},
		{name: "overflow before a zero dimension", in: stRaw(`{"a":{"dtype":"U8","shape":[4294967296,4294967296,0],"data_offsets":[0,0]}}`, nil), err: ErrShape},
		{name: "shape too small for range", in: stRaw(`{"a":{"dtype":"F32","shape":[1],"data_offsets":[0,8]}}`, f32(1, 2)), err: ErrShape, message: "needs 4 bytes, range has 8"},
		{name: "one offset", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[1]}}`, []byte{1}), err: ErrHeader},
		{name: "three offsets", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[0,1,2]}}`, []byte{1, 2}), err: ErrHeader},
		{name: "reversed offsets", in: stRaw(`{"a":{"dtype":"U8","shape":[0],"data_offsets":[1,0]}}`, []byte{1}), err: ErrOffsets},
		{name: "offset past the end", in: stRaw(`{"a":{"dtype":"U8","shape":[4],"data_offsets":[0,4]}}`, []byte{1}), err: ErrOffsets, tensor: "a"},
		{name: "huge offsets", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[9223372036854775806,9223372036854775807]}}`, []byte{1}), err: ErrOffsets},
		{name: "hole", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[0,1]},"b":{"dtype":"U8","shape":[1],"data_offsets":[2,3]}}`, []byte{1, 2, 3}),
			err: ErrOffsets, tensor: "b", message: "hole"},
		{name: "gap at the start", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[1,2]}}`, []byte{1, 2}), err: ErrOffsets, message: "hole"},
		{name: "overlap", in: stRaw(`{"a":{"dtype":"U8","shape":[2],"data_offsets":[0,2]},"b":{"dtype":"U8","shape":[2],"data_offsets":[1,3]}}`, []byte{1, 2, 3}),
			err: ErrOffsets, tensor: "b", message: "overlap"},
		{name: "same range twice", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[0,1]},"b":{"dtype":"U8","shape":[1],"data_offsets":[0,1]}}`, []byte{1}),
			err: ErrOffsets, message: "overlap"},
		{name: "trailing bytes", in: stRaw(`{"a":{"dtype":"U8","shape":[1],"data_offsets":[0,1]}}`, []byte{1, 2}), err: ErrOffsets, message: "1 trailing bytes"},
		{name: "data but no tensors", in: stRaw(`{}`, []byte{0}), err: ErrOffsets},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			meta, ts, err := Parse(tt.in)
			if tt.err != nil {
				if !errors.Is(err, tt.err) {
					t.Fatalf("error %v, want %v", err, tt.err)
				}
				var fe *Error
				if !errors.As(err, &fe) {
					t.Fatalf("error %T is not a *Error", err)
				}
				if tt.tensor != "" && fe.Tensor != tt.tensor {
					t.Errorf("error names tensor %q, want %q", fe.Tensor, tt.tensor)
				}
				msg := err.Error()
				if strings.Contains(msg, "\n") || !strings.HasPrefix(msg, "safetensors: ") || strings.Contains(msg, "safetensors: safetensors:") {
					t.Errorf("message %q is not one clean line", msg)
				}
				if !strings.Contains(msg, tt.message) {
					t.Errorf("message %q does not contain %q", msg, tt.message)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !equalMeta(meta, tt.meta) {
				t.Errorf("meta %v, want %v", meta, tt.meta)
			}
			if len(ts) != len(tt.want) {
				t.Fatalf("%d tensors, want %d", len(ts), len(tt.want))
			}
			for i, w := range tt.want {
				g := ts[i]
				if g.Name != w.Name || g.DType != w.DType || !equalInts(g.Shape, w.Shape) || !bytes.Equal(g.Data, w.Data) {
					t.Errorf("tensor %d = %+v, want %+v", i, g, w)
				}
			}
		})
	}
}

func equalMeta(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if w, ok := b[k]; !ok || w != v {
			return false
		}
	}
	return true
}

func TestParseAliases(t *testing.T) {
	in := stRaw(`{"a":{"dtype":"U8","shape":[2],"data_offsets":[0,2]}}`, []byte{1, 2})
	_, ts, err := Parse(in)
	if err != nil {
		t.Fatal(err)
	}
	if &ts[0].Data[0] != &in[len(in)-2] {
		t.Error("tensor data is a copy, want a view of the input")
	}
	if cap(ts[0].Data) != 2 {
		t.Errorf("tensor data has capacity %d, want 2 (appending must not reach the next tensor)", cap(ts[0].Data))
	}
}

func TestEncode(t *testing.T) {
	meta := map[string]string{"z": "last", "a": `{"json":"value \"quoted\""}`, "ctl": "tab\tnew\nline\x01 é ✓"}
	tensors := []Tensor{
		{"i64", "I64", []int{2}, make([]byte, 16)},
		{"f32", "F32", []int{1, 3}, bytes.Repeat([]byte{0, 0, 128, 63}, 3)},
		{"name \"with\" \\ odd\tchars", "F16", []int{1}, []byte{0, 60}},
		{"empty", "F32", []int{0}, []byte{}},
		{"u8", "U8", []int{3}, []byte{1, 2, 3}},
	}
	var buf bytes.Buffer
	if err := Encode(&buf, meta, tensors); err != nil {
		t.Fatal(err)
	}
	b := buf.Bytes()
	n := binary.LittleEndian.Uint64(b)
	if (8+n)%8 != 0 {
		t.Errorf("data buffer starts at %d, not a multiple of 8", 8+n)
	}
	if h := string(b[8 : 8+n]); strings.TrimRight(h, " ") != strings.TrimSpace(h) || !strings.HasPrefix(h, `{"__metadata__":{"a":`) {
		t.Errorf("header %q: want __metadata__ first, sorted, padded with trailing spaces", h)
	}
	gotMeta, got, err := Parse(b)
	if err != nil {
		t.Fatal(err)
	}
	if !equalMeta(gotMeta, meta) {
		t.Errorf("meta %q, want %q", gotMeta, meta)
	}
	if len(got) != len(tensors) {
		t.Fatalf("%d tensors, want %d", len(got), len(tensors))
	}
	for i, w := range tensors {
		g := got[i]
		if g.Name != w.Name || g.DType != w.DType || !equalInts(g.Shape, w.Shape) || !bytes.Equal(g.Data, w.Data) {
			t.Errorf("tensor %d = %+v, want %+v", i, g, w)
		}
	}
	var again bytes.Buffer
	if err := Encode(&again, gotMeta, got); err != nil || !bytes.Equal(again.Bytes(), b) {
		t.Errorf("re-encoding the parsed container gives different bytes (err %v)", err)
	}
}

func TestEncodeRejects(t *testing.T) {
	tests := []struct {
		name    string
		meta    map[string]string
		tensors []Tensor
		err     error
	}{
		{"misaligned F32", nil, []Tensor{{"u", "U8", []int{1}, []byte{1}}, {"f", "F32", []int{1}, make([]byte, 4)}}, ErrMisaligned},
		{"misaligned I64", nil, []Tensor{{"f", "F32", []int{1}, make([]byte, 4)}, {"i", "I64", []int{1}, make([]byte, 8)}}, ErrMisaligned},
		{"short data", nil, []Tensor{{"f", "F32", []int{2}, make([]byte, 4)}}, ErrShape},
		{"negative dimension", nil, []Tensor{{"f", "F32", []int{-1}, nil}}, ErrShape},
		{"unknown dtype", nil, []Tensor{{"f", "Q7", []int{1}, make([]byte, 4)}}, ErrDType},
		{"duplicate name", nil, []Tensor{{"f", "U8", []int{1}, []byte{1}}, {"f", "U8", []int{1}, []byte{1}}}, ErrDuplicateKey},
		{"reserved name", nil, []Tensor{{MetadataKey, "U8", []int{1}, []byte{1}}}, ErrHeader},
		{"invalid UTF-8 name", nil, []Tensor{{"\xff", "U8", []int{1}, []byte{1}}}, ErrHeader},
		{"invalid UTF-8 metadata", map[string]string{"k": "\xff"}, nil, ErrMetadata},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var buf bytes.Buffer
			err := Encode(&buf, tt.meta, tt.tensors)
			if !errors.Is(err, tt.err) {
				t.Fatalf("error %v, want %v", err, tt.err)
			}
			if buf.Len() != 0 {
				t.Errorf("wrote %d bytes before failing", buf.Len())
			}
		})
	}
}

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// stEntries is a header of n entries: zero-byte U8 tensors, or metadata
// keys when meta is set.
func stEntries(n int, meta bool) []byte {
	var h bytes.Buffer
	h.WriteByte('{')
	if meta {
		h.WriteString(`"__metadata__":{`)
	}
	for i := range n {
		if i > 0 {
			h.WriteByte(',')
		}
		if meta {
			fmt.Fprintf(&h, `"k%d":"v"`, i)
		} else {
			fmt.Fprintf(&h, `"t%d":{"dtype":"U8","shape":[0],"data_offsets":[0,0]}`, i)
		}
	}
	if meta {
		h.WriteByte('}')
	}
	h.WriteByte('}')
	return stRaw(h.String(), nil)
}

// TestHeaderEntryCap: a header may list at most MaxEntries tensors
// and MaxEntries metadata keys; a million entries are refused with the
// cap's error (not a parse of the whole header).
func TestHeaderEntryCap(t *testing.T) {
	for _, c := range []struct {
		name string
		n    int
		meta bool
		ok   bool
	}{
		{"tensors at the cap", MaxEntries, false, true},
		{"tensors one over", MaxEntries + 1, false, false},
		{"a million tensors", 1_000_000, false, false},
		{"metadata at the cap", MaxEntries, true, true},
		{"metadata one over", MaxEntries + 1, true, false},
		{"a million metadata keys", 1_000_000, true, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			meta, ts, err := Parse(stEntries(c.n, c.meta))
			if c.ok {
				if err != nil || len(ts)+len(meta) != c.n {
					t.Fatalf("%d entries: %d tensors, %d keys, %v", c.n, len(ts), len(meta), err)
				}
				return
			}
			var fe *Error
			if !errors.Is(err, ErrEntries) || !errors.As(err, &fe) || !strings.Contains(err.Error(), fmt.Sprint(MaxEntries)) {
				t.Fatalf("%d entries: %v, want ErrEntries naming the cap", c.n, err)
			}
		})
	}
}
