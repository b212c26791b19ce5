package model

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"convtag/model/token"
)

// The seed corpora live under testdata/fuzz/Fuzz*/ and are written by
// TestFixtureFuzzSeeds with -update (go test ./model -run TestFixture -update).

func FuzzParseContainer(f *testing.F) {
	f.Add(stRaw(`{}`, nil))
	f.Fuzz(func(t *testing.T, b []byte) {
		meta, ts, err := ParseContainer(b)
		if err != nil {
			var fe *FormatError
			if !errors.As(err, &fe) || strings.Contains(err.Error(), "\n") {
				t.Fatalf("error %q (%T) is not a one-line *FormatError", err, err)
			}
			return
		}
		n := binary.LittleEndian.Uint64(b)
		total := 0
		for _, x := range ts {
			total += len(x.Data)
			if k, ok := byteSize(x.Shape, DTypeSize(x.DType)); !ok || k != uint64(len(x.Data)) {
				t.Fatalf("tensor %q: %d bytes for %s %v", x.Name, len(x.Data), x.DType, x.Shape)
			}
		}
		if uint64(total) != uint64(len(b))-8-n {
			t.Fatalf("tensors hold %d bytes, data buffer has %d", total, uint64(len(b))-8-n)
		}
		// What we parsed, we can write, unless its order leaves a tensor
		// misaligned; and it reads back the same.
		var buf bytes.Buffer
		if err := EncodeContainer(&buf, meta, ts); err != nil {
			if !errors.Is(err, ErrMisaligned) {
				t.Fatalf("re-encoding: %v", err)
			}
			return
		}
		meta2, ts2, err := ParseContainer(buf.Bytes())
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

func FuzzLoad(f *testing.F) {
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := Load(b, "fuzz.safetensors")
		if err != nil {
			var fe *FormatError
			if !errors.As(err, &fe) || fe.File != "fuzz.safetensors" || strings.Contains(err.Error(), "\n") {
				t.Fatalf("error %q (%T) is not a one-line *FormatError naming the file", err, err)
			}
			return
		}
		// Everything the loader promises is safe to use must be.
		_ = m.Verify()
		_ = m.Info()
		for i := range m.Vocab.Len() {
			m.Vocab.Row(m.Vocab.Word(i))
		}
		if r := m.Vocab.Row([]byte("unknown-word")); int(r) >= m.Rows() {
			t.Fatalf("row %d of %d", r, m.Rows())
		}
		var buf bytes.Buffer
		if err := m.Encode(&buf, SaveOptions{}); err != nil {
			// Only what Load leaves for Verify may stop Encode.
			if !errors.Is(err, ErrNotFinite) && !errors.Is(err, ErrVocab) {
				t.Fatalf("re-encoding a loaded model: %v", err)
			}
			return
		}
		m2, err := Load(buf.Bytes(), "again")
		if err != nil {
			t.Fatalf("loading our own encoding: %v", err)
		}
		// Encode rewrites this package's own keys (JSON spelling, checksum
		// of its own packing, created_by); every other key must survive.
		want := *m
		want.Meta = map[string]string{}
		for k, v := range m.Meta {
			switch k {
			case MetaFormat, MetaFormatVersion, MetaLabels, MetaConfig, MetaTokenizer, MetaChecksum, MetaCreatedBy:
			default:
				want.Meta[k] = v
			}
		}
		stSameModel(t, m2, &want)
	})
}

// stTinyModel is the small model the fuzz seeds start from.
func stTinyModel(t testing.TB) *Model {
	m, err := New(Config{Dim: 2, Widths: []int{1, 2}, Filters: 2, Hidden: 2, Buckets: 2}, token.Settings{},
		[]string{"schedule", "spam"}, []string{"ferry", "tide", "pier"}, 3)
	if err != nil {
		t.Fatal(err)
	}
	stFold(m, true)
	return m
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

// stSeeds returns the named seed inputs of both fuzz targets.
func stSeeds(t testing.TB) (container, load map[string][]byte) {
	var buf bytes.Buffer
	if err := stTinyModel(t).Encode(&buf, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	valid := buf.Bytes()
	n := binary.LittleEndian.Uint64(valid)
	header, data := string(valid[8:8+n]), valid[8+n:]
	reheader := func(h string) []byte { return stRaw(h, data) }
	setLen := func(v uint64) []byte {
		b := slices.Clone(valid)
		binary.LittleEndian.PutUint64(b, v)
		return b
	}
	load = map[string][]byte{
		"valid":              valid,
		"oversized_length":   setLen(1 << 40),
		"length_past_end":    setLen(uint64(len(valid))),
		"trailing_bytes":     append(slices.Clone(valid), 0, 0, 0, 0, 0, 0, 0, 0),
		"truncated":          valid[:len(valid)-3],
		"misaligned_data":    reheader(strings.TrimRight(header, " ") + strings.Repeat(" ", int(n)-len(strings.TrimRight(header, " "))+1)),
		"duplicate_meta_key": reheader(strings.Replace(header, `"format":"convtag"`, `"format":"convtag","format":"convtag"`, 1)),
		"duplicate_tensor":   reheader(strings.Replace(header, `{"__metadata__"`, `{"vocab.bytes":{"dtype":"U8","shape":[0],"data_offsets":[0,0]},"__metadata__"`, 1)),
		"version_2":          reheader(strings.Replace(header, `"format_version":"1"`, `"format_version":"2"`, 1)),
	}
	// A NaN in the first convolution weight, which Load must catch.
	nan := slices.Clone(valid)
	_, ts, err := ParseContainer(valid)
	if err != nil {
		t.Fatal(err)
	}
	off := 8 + int(n)
	for _, x := range ts {
		if x.Name == ConvWeightName(0) {
			binary.LittleEndian.PutUint32(nan[off:], math.Float32bits(float32(math.NaN())))
			break
		}
		off += len(x.Data)
	}
	load["nan_weight"] = nan

	four := []byte{1, 2, 3, 4, 5, 6, 7, 8}
	container = map[string][]byte{
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
		"model":          valid,
	}
	return container, load
}

// TestFixtureFuzzSeeds keeps the seed corpora under testdata/fuzz in step
// with stSeeds (rewritten with -update).
func TestFixtureFuzzSeeds(t *testing.T) {
	container, load := stSeeds(t)
	for target, seeds := range map[string]map[string][]byte{"FuzzParseContainer": container, "FuzzLoad": load} {
		dir := filepath.Join("testdata", "fuzz", target)
		for name, b := range seeds {
			want := []byte("go test fuzz v1\n[]byte(" + strconv.Quote(string(b)) + ")\n")
			path := filepath.Join(dir, name)
			if stUpdating() {
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
	// The seeds must show what they are named for.
	cases := map[string]error{
		"oversized_length": ErrHeaderTooLarge, "length_past_end": ErrTruncated, "trailing_bytes": ErrOffsets,
		"truncated": ErrOffsets, "duplicate_meta_key": ErrDuplicateKey, "duplicate_tensor": ErrDuplicateKey,
		"version_2": ErrVersion, "nan_weight": ErrNotFinite, "valid": nil, "misaligned_data": nil,
	}
	for name, want := range cases {
		if _, err := Load(load[name], name); !errors.Is(err, want) || (want == nil) != (err == nil) {
			t.Errorf("seed %s: %v, want %v", name, err, want)
		}
	}
	if n := binary.LittleEndian.Uint64(load["misaligned_data"]); (8+n)%8 == 0 {
		t.Error("seed misaligned_data has an aligned data buffer")
	}
}
