package safetensors

import (
	"bytes"
	"encoding/binary"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the fuzz seed corpus under testdata")

// The seed corpus lives under testdata/fuzz/FuzzParse/ and is written by
// TestFuzzSeeds with -update (go test ./model/safetensors -run TestFuzzSeeds -update).

func FuzzParse(f *testing.F) {
	f.Add(stRaw(`{}`, nil))
	f.Fuzz(func(t *testing.T, b []byte) {
		meta, ts, err := Parse(b)
		if err != nil {
			var e *Error
			if !errors.As(err, &e) || strings.Contains(err.Error(), "\n") {
				t.Fatalf("error %q (%T) is not a one-line *Error", err, err)
			}
			return
		}
		n := binary.LittleEndian.Uint64(b)
		total := 0
		for _, x := range ts {
			total += len(x.Data)
			if k, ok := ByteSize(x.DType, x.Shape); !ok || k != uint64(len(x.Data)) {
				t.Fatalf("tensor %q: %d bytes for %s %v", x.Name, len(x.Data), x.DType, x.Shape)
			}
		}
		if uint64(total) != uint64(len(b))-8-n {
			t.Fatalf("tensors hold %d bytes, data buffer has %d", total, uint64(len(b))-8-n)
		}
		// What we parsed, we can write, unless its order leaves a tensor
		// misaligned; and it reads back the same.
		var buf bytes.Buffer
		if err := Encode(&buf, meta, ts); err != nil {
			if !errors.Is(err, ErrMisaligned) {
				t.Fatalf("re-encoding: %v", err)
			}
			return
		}
		meta2, ts2, err := Parse(buf.Bytes())
		if err != nil {
			t.Fatalf("parsing our own encoding: %v", err)
		}
		if !equalMeta(meta, meta2) || !slices.EqualFunc(ts, ts2, func(a, b Tensor) bool {
			return a.Name == b.Name && a.DType == b.DType && equalInts(a.Shape, b.Shape) && bytes.Equal(a.Data, b.Data)
		}) {
			t.Fatal("round trip changed the container")
		}
	})
}

// stEntry is one tensor line of a hand-made header.
type stEntry struct {
	name, dtype string
	shape       string // JSON array text
	begin, end  uint64
}

func stHeader(meta string, es []stEntry) string {
	var b strings.Builder
	b.WriteString("{")
	if meta != "" {
		b.WriteString(`"__metadata__":` + meta)
	}
	for i, e := range es {
		if i > 0 || meta != "" {
			b.WriteString(",")
		}
		fmt.Fprintf(&b, `%s:{"dtype":%q,"shape":%s,"data_offsets":[%d,%d]}`, strconv.Quote(e.name), e.dtype, e.shape, e.begin, e.end)
	}
	b.WriteString("}")
	return b.String()
}

// stSeeds returns the named seed inputs of FuzzParse.
func stSeeds(t testing.TB) map[string][]byte {
	// A container laid out as a model file is: metadata, then tensors of
	// every element size in Encode's order (largest elements first).
	var buf bytes.Buffer
	err := Encode(&buf, map[string]string{"format": "demo", "labels": `["harbour","ferry"]`}, []Tensor{
		{"offsets", I64, []int{3}, Bytes([]int64{0, 4, 9})},
		{"weight", F32, []int{2, 2}, Bytes([]float32{1, -0.5, 0, 2})},
		{"index", I32, []int{4}, Bytes([]int32{0, 2, 0, 1})},
		{"table", F16, []int{3}, Bytes([]uint16{0x3c00, 0xbc00, 0})},
		{"bytes", U8, []int{9}, []byte("tidepiers")},
	})
	if err != nil {
		t.Fatal(err)
	}
	mixed := buf.Bytes()
	four := []byte{1, 2, 3, 4, 5, 6, 7, 8}
	return map[string][]byte{
		"empty":          stRaw(`{}`, nil),
		"two_tensors":    stRaw(stHeader(`{"k":"v"}`, []stEntry{{"a", "F32", "[1]", 0, 4}, {"b", "U8", "[2,2]", 4, 8}}), four),
		"out_of_order":   stRaw(stHeader("", []stEntry{{"b", "U8", "[4]", 4, 8}, {"a", "I32", "[1]", 0, 4}}), four),
		"overlap":        stRaw(stHeader("", []stEntry{{"a", "U8", "[6]", 0, 6}, {"b", "U8", "[4]", 4, 8}}), four),
		"gap":            stRaw(stHeader("", []stEntry{{"a", "U8", "[2]", 0, 2}, {"b", "U8", "[4]", 4, 8}}), four),
		"shape_overflow": stRaw(stHeader("", []stEntry{{"a", "F64", "[4294967296,4294967296]", 0, 8}}), four),
		"trailing_bytes": stRaw(stHeader("", []stEntry{{"a", "U8", "[4]", 0, 4}}), four),
		"duplicate_key":  stRaw(`{"a":{"dtype":"U8","shape":[8],"data_offsets":[0,8]},"a":{"dtype":"U8","shape":[8],"data_offsets":[0,8]}}`, four),
		"misaligned":     stRaw(stHeader("", []stEntry{{"a", "U8", "[1]", 0, 1}, {"b", "F32", "[1]", 1, 5}, {"c", "U8", "[3]", 5, 8}}), four),
		"huge_length":    binary.LittleEndian.AppendUint64(nil, math.MaxUint64),
		"mixed_dtypes":   mixed,
	}
}

// TestFuzzSeeds keeps the seed corpus under testdata/fuzz in step with
// stSeeds (rewritten with -update).
func TestFuzzSeeds(t *testing.T) {
	dir := filepath.Join("testdata", "fuzz", "FuzzParse")
	for name, b := range stSeeds(t) {
		want := []byte("go test fuzz v1\n[]byte(" + strconv.Quote(string(b)) + ")\n")
		path := filepath.Join(dir, name)
		if *update {
			if err := os.MkdirAll(dir, 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(path, want, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		got, err := os.ReadFile(path)
		if err != nil || !bytes.Equal(got, want) {
			t.Errorf("%s is missing or stale (%v); rebuild with -update", path, err)
		}
	}
}
