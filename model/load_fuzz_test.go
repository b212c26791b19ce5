package model

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"convtag/model/safetensors"
	"convtag/model/token"
)

// The seed corpora live under testdata/fuzz/Fuzz*/ and are written by
// TestFixtureFuzzSeeds with -update (go test ./model -run TestFixture -update).

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

// stSeeds returns the named seed inputs of FuzzLoad.
func stSeeds(t testing.TB) (load map[string][]byte) {
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
	_, ts, err := safetensors.Parse(valid)
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

	return load
}

// TestFixtureFuzzSeeds keeps the seed corpora under testdata/fuzz in step
// with stSeeds (rewritten with -update).
func TestFixtureFuzzSeeds(t *testing.T) {
	load := stSeeds(t)
	for target, seeds := range map[string]map[string][]byte{"FuzzLoad": load} {
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
		"oversized_length": safetensors.ErrHeaderTooLarge, "length_past_end": safetensors.ErrTruncated, "trailing_bytes": safetensors.ErrOffsets,
		"truncated": safetensors.ErrOffsets, "duplicate_meta_key": safetensors.ErrDuplicateKey, "duplicate_tensor": safetensors.ErrDuplicateKey,
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
