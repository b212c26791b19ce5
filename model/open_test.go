package model

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"unsafe"

	"convtag/model/nb"
	"convtag/model/safetensors"
	"convtag/model/token"
)

// stModel returns a small random model; hidden adds a hidden layer, fold
// "F32" or "F16" adds fold tables.
func stModel(t testing.TB, words int, hidden int, fold string) *Model {
	t.Helper()
	ws := make([]string, words)
	for i := range ws {
		ws[i] = fmt.Sprintf("w%d", i)
	}
	cfg := Config{Dim: 6, Widths: []int{2, 3}, Filters: 4, Hidden: hidden, Buckets: 5}
	m, err := New(cfg, token.Settings{KeepPunct: true, MaxTokens: 50}, []string{"pier", "tide", "gull"}, ws, 7)
	if err != nil {
		t.Fatal(err)
	}
	switch fold {
	case "F32":
		stFold(m, false)
	case "F16":
		stFold(m, true)
	}
	return m
}

// stSameModel compares everything a model file carries.
func stSameModel(t *testing.T, got, want *Model) {
	t.Helper()
	eq := func(what string, ok bool) {
		if !ok {
			t.Errorf("%s differs", what)
		}
	}
	eq("config", got.Config.Dim == want.Config.Dim && slices.Equal(got.Config.Widths, want.Config.Widths) &&
		got.Config.Filters == want.Config.Filters && got.Config.Hidden == want.Config.Hidden && got.Config.Buckets == want.Config.Buckets)
	eq("tokenizer", got.TokenSettings == want.TokenSettings)
	eq("labels", slices.Equal(got.Labels, want.Labels))
	eq("embedding", slices.Equal(got.Emb, want.Emb))
	eq("convs", slices.EqualFunc(got.Convs, want.Convs, func(a, b Conv) bool {
		return a.Width == b.Width && slices.Equal(a.W, b.W) && slices.Equal(a.B, b.B)
	}))
	eq("hidden", (got.Hidden == nil) == (want.Hidden == nil) && (got.Hidden == nil || got.Hidden.In == want.Hidden.In &&
		got.Hidden.Out == want.Hidden.Out && slices.Equal(got.Hidden.W, want.Hidden.W) && slices.Equal(got.Hidden.B, want.Hidden.B)))
	eq("output", got.Out.In == want.Out.In && got.Out.Out == want.Out.Out && slices.Equal(got.Out.W, want.Out.W) && slices.Equal(got.Out.B, want.Out.B))
	eq("fold", slices.EqualFunc(got.Fold, want.Fold, func(a, b FoldTable) bool {
		return a.Width == b.Width && slices.Equal(a.F32, b.F32) && slices.Equal(a.F16, b.F16) && (a.F16 == nil) == (b.F16 == nil)
	}))
	eq("vocabulary", got.Vocab.Len() == want.Vocab.Len() && got.Vocab.Buckets() == want.Vocab.Buckets() &&
		bytes.Equal(got.Vocab.blob, want.Vocab.blob) && slices.Equal(got.Vocab.offs, want.Vocab.offs) && slices.Equal(got.Vocab.index, want.Vocab.index))
	for k, v := range want.Meta {
		if got.Meta[k] != v {
			t.Errorf("metadata %q = %q, want %q", k, got.Meta[k], v)
		}
	}
	for i := range want.Vocab.Len() {
		if w := want.Vocab.Word(i); got.Vocab.Lookup(w) != i {
			t.Errorf("word %q: lookup %d, want %d", w, got.Vocab.Lookup(w), i)
		}
	}
	if got.Tokenizer().Settings() != want.TokenSettings {
		t.Error("tokenizer not set from the file's settings")
	}
}

func TestSaveOpen(t *testing.T) {
	tests := []struct {
		name   string
		words  int
		hidden int
		fold   string
		meta   map[string]string
	}{
		{name: "plain", words: 20},
		{name: "no words", words: 0},
		{name: "hidden layer", words: 9, hidden: 5},
		{name: "fold F32", words: 9, fold: "F32"},
		{name: "fold F16 and hidden", words: 30, hidden: 3, fold: "F16"},
		{name: "training summary", words: 3, meta: map[string]string{MetaTraining: `{"epochs":3,"accuracy":0.91}`, "note": "ferry\tlog \"x\""}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := stModel(t, tt.words, tt.hidden, tt.fold)
			for k, v := range tt.meta {
				m.Meta[k] = v
			}
			path := filepath.Join(t.TempDir(), "m.safetensors")
			if err := m.Save(path, SaveOptions{}); err != nil {
				t.Fatal(err)
			}
			raw, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			mapped, err := Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer mapped.Close()
			read, err := Load(raw, path) // the portable path, differential against mmap
			if err != nil {
				t.Fatal(err)
			}
			for _, got := range []*Model{mapped, read} {
				stSameModel(t, got, m)
				if err := got.Verify(); err != nil {
					t.Error(err)
				}
				var again bytes.Buffer
				if err := got.Encode(&again, SaveOptions{}); err != nil {
					t.Fatal(err)
				}
				if !bytes.Equal(again.Bytes(), raw) {
					t.Error("re-encoding the opened model does not give the file's bytes")
				}
				if sum, _ := got.Checksum(); sum != got.Meta[MetaChecksum] {
					t.Errorf("checksum %s, metadata %s", sum, got.Meta[MetaChecksum])
				}
			}
			if sum, _ := m.Checksum(); sum != mapped.Meta[MetaChecksum] {
				t.Errorf("in-memory checksum %s, file says %s", sum, mapped.Meta[MetaChecksum])
			}
			if fi, err := os.Stat(path); err != nil || fi.Mode().Perm() != 0o644 {
				t.Errorf("file mode %v, %v; want 0644", fi.Mode(), err)
			}
			if err := mapped.Close(); err != nil {
				t.Error(err)
			}
			if err := mapped.Close(); err != nil {
				t.Errorf("second Close: %v", err)
			}
		})
	}
}

// stWithin reports whether s's first element lies inside b.
func stWithin[T any](s []T, b []byte) bool {
	if len(s) == 0 || len(b) == 0 {
		return false
	}
	p := uintptr(unsafe.Pointer(&s[0]))
	lo := uintptr(unsafe.Pointer(&b[0]))
	return p >= lo && p < lo+uintptr(len(b))
}

func TestLoadZeroCopyAndUnaligned(t *testing.T) {
	m := stModel(t, 12, 3, "F16")
	var buf bytes.Buffer
	if err := m.Encode(&buf, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	// An 8-aligned copy: every tensor is a view.
	aligned := unsafe.Slice((*byte)(unsafe.Pointer(unsafe.SliceData(make([]uint64, buf.Len()/8+1)))), buf.Len())
	copy(aligned, buf.Bytes())
	got, err := Load(aligned, "aligned")
	if err != nil {
		t.Fatal(err)
	}
	stSameModel(t, got, m)
	if littleEndian {
		views := map[string]bool{
			"embedding": stWithin(got.Emb, aligned), "conv": stWithin(got.Convs[0].W, aligned),
			"hidden": stWithin(got.Hidden.W, aligned), "output": stWithin(got.Out.B, aligned),
			"fold": stWithin(got.Fold[1].F16, aligned), "offsets": stWithin(got.Vocab.offs, aligned),
			"index": stWithin(got.Vocab.index, aligned), "blob": stWithin(got.Vocab.blob, aligned),
		}
		for k, v := range views {
			if !v {
				t.Errorf("%s is a copy, want a view of the file's bytes", k)
			}
		}
	}
	// Shifted by one byte: the numeric tensors cannot be viewed and are
	// copied, with the same values.
	for shift := 1; shift < 8; shift++ {
		back := make([]uint64, buf.Len()/8+2)
		b := unsafe.Slice((*byte)(unsafe.Pointer(unsafe.SliceData(back))), len(back)*8)[shift : shift+buf.Len()]
		copy(b, buf.Bytes())
		got, err := Load(b, "shifted")
		if err != nil {
			t.Fatal(err)
		}
		stSameModel(t, got, m)
		if err := got.Verify(); err != nil {
			t.Error(err)
		}
		if shift%4 != 0 && stWithin(got.Emb, b) {
			t.Errorf("shift %d: misaligned embedding viewed in place", shift)
		}
	}
}

// stEdit is a change to a valid model's container, for error tests.
type stEdit func(meta map[string]string, ts []Tensor) []Tensor

func stTensor(ts []Tensor, name string) *Tensor {
	for i := range ts {
		if ts[i].Name == name {
			return &ts[i]
		}
	}
	panic("no tensor " + name)
}

// stSetF32 writes value v at element i of an F32 tensor, on a private copy.
func stSetF32(ts []Tensor, name string, i int, v float32) {
	t := stTensor(ts, name)
	t.Data = slices.Clone(t.Data)
	binary.LittleEndian.PutUint32(t.Data[4*i:], math.Float32bits(v))
}

func stSetInt(ts []Tensor, name string, i int, v int64) {
	t := stTensor(ts, name)
	t.Data = slices.Clone(t.Data)
	switch t.DType {
	case "I64":
		binary.LittleEndian.PutUint64(t.Data[8*i:], uint64(v))
	case "I32":
		binary.LittleEndian.PutUint32(t.Data[4*i:], uint32(v))
	}
}

func stDrop(ts []Tensor, name string) []Tensor {
	return slices.DeleteFunc(ts, func(t Tensor) bool { return t.Name == name })
}

// stBuild encodes a model's container after edit, recomputing the checksum
// (unless the edit changed it) so that only the edit is wrong.
func stBuild(t *testing.T, m *Model, edit stEdit) []byte {
	t.Helper()
	meta, ts, err := m.container(SaveOptions{})
	if err != nil {
		t.Fatal(err)
	}
	orig := meta[MetaChecksum]
	ts = edit(meta, ts)
	slices.SortStableFunc(ts, func(a, b Tensor) int { return b.DType.Size() - a.DType.Size() })
	if c, ok := meta[MetaChecksum]; ok && c == orig {
		var data []byte
		for _, x := range ts {
			data = append(data, x.Data...)
		}
		sum := sha256.Sum256(data)
		meta[MetaChecksum] = "sha256:" + hex.EncodeToString(sum[:])
	}
	var buf bytes.Buffer
	if err := safetensors.Encode(&buf, meta, ts); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func TestLoadRejects(t *testing.T) {
	base := stModel(t, 10, 0, "")
	withHidden := stModel(t, 10, 3, "F16")
	setMeta := func(k, v string) stEdit {
		return func(meta map[string]string, ts []Tensor) []Tensor { meta[k] = v; return ts }
	}
	tests := []struct {
		name   string
		m      *Model
		edit   stEdit
		err    error
		tensor string
		detail string
		// atVerify: Load accepts the file (the check reads every word, so it
		// is Verify's), lookups stay in bounds, and Verify reports it.
		atVerify bool
	}{
		{name: "no format", edit: func(meta map[string]string, ts []Tensor) []Tensor { delete(meta, MetaFormat); return ts }, err: ErrNotModel},
		{name: "other format", edit: setMeta(MetaFormat, "pt"), err: ErrNotModel},
		{name: "version 2", edit: setMeta(MetaFormatVersion, "2"), err: ErrVersion, detail: `"2"`},
		{name: "version 01", edit: setMeta(MetaFormatVersion, "01"), err: ErrVersion},
		{name: "config not JSON", edit: setMeta(MetaConfig, "{dim:6"), err: ErrMetadata, detail: "config"},
		{name: "config unknown field", edit: setMeta(MetaConfig, `{"dim":6,"widths":[2,3],"filters":4,"buckets":5,"depth":2}`), err: ErrMetadata},
		{name: "config duplicate key", edit: setMeta(MetaConfig, `{"dim":6,"dim":7,"widths":[2,3],"filters":4,"buckets":5}`), err: ErrMetadata, detail: "duplicate"},
		{name: "config trailing data", edit: setMeta(MetaConfig, `{"dim":6,"widths":[2,3],"filters":4,"buckets":5} {}`), err: ErrMetadata},
		{name: "config invalid", edit: setMeta(MetaConfig, `{"dim":0,"widths":[2,3],"filters":4,"buckets":5}`), err: ErrMetadata, detail: "dim"},
		{name: "no tokenizer", edit: func(meta map[string]string, ts []Tensor) []Tensor { delete(meta, MetaTokenizer); return ts }, err: ErrMetadata},
		{name: "negative max tokens", edit: setMeta(MetaTokenizer, `{"max_tokens":-1}`), err: ErrMetadata},
		// A cap the predictor would size a buffer from: 2^62 used to open and
		// then panic (makeslice) at the first prediction.
		{name: "max tokens 2^62", edit: setMeta(MetaTokenizer, `{"max_tokens":4611686018427387904}`), err: ErrMetadata, detail: "max_tokens 4611686018427387904 out of range 0..1048576"},
		{name: "max tokens one above the cap", edit: setMeta(MetaTokenizer, `{"max_tokens":1048577}`), err: ErrMetadata, detail: "max_tokens"},
		{name: "dim 2^40", edit: setMeta(MetaConfig, `{"dim":1099511627776,"widths":[2,3],"filters":4,"buckets":5}`), err: ErrMetadata, detail: "dim 1099511627776 out of range"},
		{name: "filters 2^40", edit: setMeta(MetaConfig, `{"dim":6,"widths":[2,3],"filters":1099511627776,"buckets":5}`), err: ErrMetadata, detail: "filters 1099511627776 out of range"},
		{name: "hidden 2^40", edit: setMeta(MetaConfig, `{"dim":6,"widths":[2,3],"filters":4,"hidden":1099511627776,"buckets":5}`), err: ErrMetadata, detail: "hidden 1099511627776 out of range"},
		{name: "buckets 2^40", edit: setMeta(MetaConfig, `{"dim":6,"widths":[2,3],"filters":4,"buckets":1099511627776}`), err: ErrMetadata, detail: "buckets 1099511627776 out of range"},
		{name: "width 2^40", edit: setMeta(MetaConfig, `{"dim":6,"widths":[2,1099511627776],"filters":4,"buckets":5}`), err: ErrMetadata, detail: "widths: 1099511627776 out of range"},
		{name: "one label", edit: setMeta(MetaLabels, `["pier"]`), err: ErrMetadata},
		{name: "labels not strings", edit: setMeta(MetaLabels, `[1,2,3]`), err: ErrMetadata},
		{name: "duplicate label", edit: setMeta(MetaLabels, `["pier","tide","pier"]`), err: ErrMetadata},
		{name: "bad checksum", edit: setMeta(MetaChecksum, "md5:abc"), err: ErrMetadata},
		{name: "missing embedding", edit: func(_ map[string]string, ts []Tensor) []Tensor { return stDrop(ts, TensorEmbedding) }, err: ErrMissingTensor, tensor: TensorEmbedding},
		{name: "missing conv bias", edit: func(_ map[string]string, ts []Tensor) []Tensor { return stDrop(ts, "convs.1.bias") }, err: ErrMissingTensor, tensor: "convs.1.bias"},
		{name: "missing index", edit: func(_ map[string]string, ts []Tensor) []Tensor { return stDrop(ts, TensorVocabIndex) }, err: ErrMissingTensor},
		{name: "embedding as F64", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			e := stTensor(ts, TensorEmbedding)
			e.DType, e.Shape = "F64", []int{e.Shape[0], e.Shape[1] / 2}
			return ts
		}, err: ErrSchema, tensor: TensorEmbedding, detail: "dtype"},
		{name: "embedding one row short", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			e := stTensor(ts, TensorEmbedding)
			e.Shape[0]--
			e.Data = e.Data[:len(e.Data)-4*e.Shape[1]]
			return ts
		}, err: ErrSchema, detail: "shape"},
		{name: "conv weight transposed", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			c := stTensor(ts, "convs.0.weight")
			c.Shape = []int{c.Shape[0], c.Shape[2], c.Shape[1]}
			return ts
		}, err: ErrSchema, tensor: "convs.0.weight"},
		{name: "unexpected tensor", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			return append(ts, Tensor{Name: "convs.2.weight", DType: "F32", Shape: []int{1}, Data: make([]byte, 4)})
		}, err: ErrUnexpectedTensor, tensor: "convs.2.weight"},
		{name: "hidden layer the config lacks", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			return append(ts, Tensor{Name: TensorHiddenB, DType: "F32", Shape: []int{3}, Data: make([]byte, 12)})
		}, err: ErrUnexpectedTensor},
		{name: "NaN conv weight", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetF32(ts, "convs.1.weight", 5, float32(math.NaN()))
			return ts
		}, err: ErrNotFinite, tensor: "convs.1.weight", detail: "element 5"},
		{name: "infinite output bias", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetF32(ts, TensorOutputB, 2, float32(math.Inf(-1)))
			return ts
		}, err: ErrNotFinite, tensor: TensorOutputB},
		{name: "NaN hidden weight", m: withHidden, edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetF32(ts, TensorHiddenW, 0, float32(math.NaN()))
			return ts
		}, err: ErrNotFinite, tensor: TensorHiddenW},
		{name: "padding row not zero", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetF32(ts, TensorEmbedding, 3, 0.5)
			return ts
		}, err: ErrSchema, detail: "padding"},
		{name: "first offset not zero", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetInt(ts, TensorVocabOffsets, 0, 1)
			return ts
		}, err: ErrVocab},
		{name: "offsets decrease", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetInt(ts, TensorVocabOffsets, 4, 1)
			return ts
		}, atVerify: true, err: ErrVocab, detail: "below"},
		{name: "offset past the blob", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetInt(ts, TensorVocabOffsets, 10, 1000)
			return ts
		}, err: ErrVocab},
		{name: "negative offset", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetInt(ts, TensorVocabOffsets, 3, -5)
			return ts
		}, atVerify: true, err: ErrVocab},
		{name: "offsets as I32", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			o := stTensor(ts, TensorVocabOffsets)
			o.DType, o.Shape[0] = "I32", o.Shape[0]*2
			return ts
		}, err: ErrSchema},
		{name: "index entry out of range", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetInt(ts, TensorVocabIndex, 1, 11)
			return ts
		}, atVerify: true, err: ErrVocab, detail: "outside 0..10"},
		{name: "negative index entry", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stSetInt(ts, TensorVocabIndex, 0, -1)
			return ts
		}, atVerify: true, err: ErrVocab},
		{name: "index not a power of two", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			ix := stTensor(ts, TensorVocabIndex)
			ix.Shape[0] -= 3
			ix.Data = ix.Data[:4*ix.Shape[0]]
			return ts
		}, err: ErrVocab},
		{name: "index no larger than the vocabulary", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			ix := stTensor(ts, TensorVocabIndex)
			ix.Shape[0] = 8
			ix.Data = make([]byte, 32)
			return ts
		}, err: ErrVocab},
		{name: "blob two-dimensional", edit: func(_ map[string]string, ts []Tensor) []Tensor {
			b := stTensor(ts, TensorVocabBytes)
			b.Shape = []int{1, len(b.Data)}
			return ts
		}, err: ErrSchema},
		{name: "fold for one width only", m: withHidden, edit: func(_ map[string]string, ts []Tensor) []Tensor { return stDrop(ts, "fold.1") }, err: ErrMissingTensor, tensor: "fold.1"},
		{name: "fold without fold.0", m: withHidden, edit: func(_ map[string]string, ts []Tensor) []Tensor { return stDrop(ts, "fold.0") }, err: ErrMissingTensor},
		{name: "fold of two dtypes", m: withHidden, edit: func(_ map[string]string, ts []Tensor) []Tensor {
			f := stTensor(ts, "fold.1")
			f.DType, f.Shape = "F32", []int{f.Shape[0], f.Shape[1], f.Shape[2] / 2}
			return ts
		}, err: ErrSchema, tensor: "fold.1"},
		{name: "fold as I16", m: withHidden, edit: func(_ map[string]string, ts []Tensor) []Tensor {
			stTensor(ts, "fold.0").DType = "I16"
			return ts
		}, err: ErrSchema, tensor: "fold.0"},
		{name: "fold padding row not zero", m: withHidden, edit: func(_ map[string]string, ts []Tensor) []Tensor {
			f := stTensor(ts, "fold.0")
			f.Data = slices.Clone(f.Data)
			f.Data[3] = 0x3c
			return ts
		}, err: ErrSchema, detail: "padding"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := tt.m
			if m == nil {
				m = base
			}
			raw := stBuild(t, m, tt.edit)
			got, err := Load(raw, "ferry.safetensors")
			if tt.atVerify {
				if err != nil {
					t.Fatalf("Load: %v; want the check left to Verify", err)
				}
				for i := range got.Vocab.Len() {
					got.Vocab.Row(got.Vocab.Word(i)) // must not panic
				}
				got.Vocab.Row([]byte("unknown-word"))
				err = got.Verify()
			}
			if !errors.Is(err, tt.err) {
				t.Fatalf("error %v, want %v", err, tt.err)
			}
			var fe *FormatError
			if !errors.As(err, &fe) || fe.File != "ferry.safetensors" {
				t.Fatalf("error %#v does not name the file", err)
			}
			if tt.tensor != "" && fe.Tensor != tt.tensor {
				t.Errorf("error names tensor %q, want %q", fe.Tensor, tt.tensor)
			}
			msg := err.Error()
			if !strings.HasPrefix(msg, "model: ferry.safetensors: ") || strings.Contains(msg, "\n") || strings.Contains(msg, "model: model:") || strings.Count(msg, "ferry.safetensors") != 1 {
				t.Errorf("message %q: want one line starting with the file", msg)
			}
			if !strings.Contains(msg, tt.detail) {
				t.Errorf("message %q lacks %q", msg, tt.detail)
			}
		})
	}
}

func TestVerify(t *testing.T) {
	m := stModel(t, 10, 0, "F16")
	good := stBuild(t, m, func(_ map[string]string, ts []Tensor) []Tensor { return ts })
	if got, err := Load(good, "good"); err != nil || got.Verify() != nil {
		t.Fatalf("unedited model: %v", err)
	}
	tests := []struct {
		name string
		raw  func() []byte
		err  error
	}{
		{"flipped data byte", func() []byte {
			b := slices.Clone(good)
			b[len(b)-1] ^= 1 // the last word's last byte
			return b
		}, ErrChecksum},
		{"no checksum", func() []byte {
			return stBuild(t, m, func(meta map[string]string, ts []Tensor) []Tensor { delete(meta, MetaChecksum); return ts })
		}, ErrNoChecksum},
		{"NaN embedding", func() []byte {
			return stBuild(t, m, func(_ map[string]string, ts []Tensor) []Tensor {
				stSetF32(ts, TensorEmbedding, 6*7+2, float32(math.NaN()))
				return ts
			})
		}, ErrNotFinite},
		{"infinite fold entry", func() []byte {
			return stBuild(t, m, func(_ map[string]string, ts []Tensor) []Tensor {
				f := stTensor(ts, "fold.1")
				f.Data = slices.Clone(f.Data)
				binary.LittleEndian.PutUint16(f.Data[len(f.Data)-2:], 0xfc00)
				return ts
			})
		}, ErrNotFinite},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := Load(tt.raw(), "ferry.safetensors")
			if err != nil {
				t.Fatalf("Load: %v (these problems are for Verify to find)", err)
			}
			err = got.Verify()
			if !errors.Is(err, tt.err) {
				t.Fatalf("Verify: %v, want %v", err, tt.err)
			}
			if !strings.HasPrefix(err.Error(), "model: ferry.safetensors: ") {
				t.Errorf("message %q does not name the file", err)
			}
		})
	}
}

func TestSaveReplacesMappedFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "m.safetensors")
	a, b := stModel(t, 10, 0, ""), stModel(t, 40, 2, "F32")
	if err := a.Save(path, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	old, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer old.Close()
	if err := b.Save(path, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	// The old mapping still reads the old file's bytes, intact.
	stSameModel(t, old, a)
	if err := old.Verify(); err != nil {
		t.Error(err)
	}
	cur, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer cur.Close()
	stSameModel(t, cur, b)
	if ents, _ := os.ReadDir(dir); len(ents) != 1 {
		t.Errorf("directory holds %d entries, want only the model (no temporary files)", len(ents))
	}
}

func TestSaveRejects(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "bad.safetensors")
	m := stModel(t, 5, 0, "")
	m.Emb = slices.Clone(m.Emb)
	m.Emb[len(m.Emb)-1] = float32(math.Inf(1))
	if err := m.Save(path, SaveOptions{}); !errors.Is(err, ErrNotFinite) || !strings.Contains(err.Error(), path) {
		t.Errorf("saving an infinite weight: %v", err)
	}
	m = stModel(t, 5, 0, "")
	m.Convs[1].B = m.Convs[1].B[:2]
	if err := m.Save(path, SaveOptions{}); !errors.Is(err, safetensors.ErrShape) && !errors.Is(err, ErrSchema) {
		t.Errorf("saving a short bias: %v", err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("failed saves left %d files", len(ents))
	}
	if err := stModel(t, 5, 0, "").Save(filepath.Join(dir, "no", "such", "dir", "m"), SaveOptions{}); err == nil {
		t.Error("saving into a missing directory succeeded")
	}
}

func TestOpenErrors(t *testing.T) {
	dir := t.TempDir()
	empty := filepath.Join(dir, "empty.safetensors")
	os.WriteFile(empty, nil, 0o644)
	tests := []struct {
		path string
		err  error
	}{
		{filepath.Join(dir, "missing.safetensors"), os.ErrNotExist},
		{empty, safetensors.ErrTooShort},
		{dir, nil}, // a directory: any error, naming it
	}
	for _, tt := range tests {
		_, err := Open(tt.path)
		if err == nil || tt.err != nil && !errors.Is(err, tt.err) {
			t.Errorf("Open(%s): %v, want %v", tt.path, err, tt.err)
			continue
		}
		if !strings.Contains(err.Error(), tt.path) || strings.Contains(err.Error(), "\n") {
			t.Errorf("Open(%s): message %q does not name the file on one line", tt.path, err)
		}
	}
}

func TestInfo(t *testing.T) {
	m := stModel(t, 7, 3, "F16")
	m.Meta[MetaTraining] = `{"epochs":4,"best":{"epoch":3,"accuracy":0.875}}`
	path := filepath.Join(t.TempDir(), "m.safetensors")
	if err := m.Save(path, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	got, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer got.Close()
	in := got.Info()
	fi, _ := os.Stat(path)
	params := int64(len(m.Emb) + len(m.Out.W) + len(m.Out.B) + len(m.Hidden.W) + len(m.Hidden.B))
	for _, c := range m.Convs {
		params += int64(len(c.W) + len(c.B))
	}
	if in.FileSize != fi.Size() || in.FormatVersion != 1 || !slices.Equal(in.Labels, m.Labels) || in.Vocabulary != 7 ||
		in.Buckets != 5 || in.Rows != 13 || in.Dim != 6 || !slices.Equal(in.Widths, []int{2, 3}) || in.Filters != 4 ||
		in.Hidden != 3 || !in.Folded || in.FoldDType != "F16" || in.Parameters != params || in.Tokenizer != m.TokenSettings ||
		in.Checksum != got.Meta[MetaChecksum] || in.CreatedBy != "convtag dev" || len(in.Metadata) != len(got.Meta) {
		t.Errorf("info %+v", in)
	}
	js, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	var back struct {
		Training struct {
			Best struct{ Accuracy float64 }
		}
	}
	if err := json.Unmarshal(js, &back); err != nil || back.Training.Best.Accuracy != 0.875 {
		t.Errorf("JSON %s: training summary not embedded as JSON (%v)", js, err)
	}
	m.Meta[MetaTraining] = "{not json"
	if in := m.Info(); in.Training != nil || in.TrainingError == "" || in.FileSize != 0 {
		t.Errorf("broken training summary: %+v", in)
	}
}

// BenchmarkOpen opens (maps, parses, checks) a model with a 1,000 and a
// 100,000-word vocabulary (d=128, widths 3, 4, 5 with 100 filters, 10,000
// buckets). Nothing is rebuilt at open, so both should take about the same
// time; compare the two lines. The files are built before the timed loop.
// The +verify lines add Verify, which reads the whole file.
func BenchmarkOpen(b *testing.B) {
	for _, words := range []int{1000, 100000} {
		ws := make([]string, words)
		for i := range ws {
			ws[i] = fmt.Sprintf("word%06d", i)
		}
		m, err := New(DefaultConfig(), token.Settings{}, []string{"schedule", "tickets", "spam"}, ws, 1)
		if err != nil {
			b.Fatal(err)
		}
		path := filepath.Join(b.TempDir(), "m.safetensors")
		if err := m.Save(path, SaveOptions{}); err != nil {
			b.Fatal(err)
		}
		fi, _ := os.Stat(path)
		b.Run(fmt.Sprintf("words=%d", words), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(fi.Size())
			for b.Loop() {
				m, err := Open(path)
				if err != nil {
					b.Fatal(err)
				}
				m.Close()
			}
		})
		// For comparison: what reading everything (checksum and finiteness
		// of the embedding, as Verify does) would add to every open.
		b.Run(fmt.Sprintf("words=%d+verify", words), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(fi.Size())
			for b.Loop() {
				m, err := Open(path)
				if err != nil {
					b.Fatal(err)
				}
				if err := m.Verify(); err != nil {
					b.Fatal(err)
				}
				m.Close()
			}
		})
	}
}

// BenchmarkVocabChecks times the two checks of Open that read every word's
// offset and every index slot, for a 100,000-word vocabulary: the part of
// BenchmarkOpen that grows with the vocabulary.
func BenchmarkVocabChecks(b *testing.B) {
	ws := make([]string, 100000)
	for i := range ws {
		ws[i] = fmt.Sprintf("word%06d", i)
	}
	v := NewVocab(ws, 10)
	b.ReportAllocs()
	b.SetBytes(int64(8*len(v.offs) + 4*len(v.index)))
	for b.Loop() {
		if checkOffsets(v.offs, len(v.blob)) != nil || checkIndex(v) != nil {
			b.Fatal("valid vocabulary rejected")
		}
	}
}

func TestFirstNonFinite(t *testing.T) {
	v := make([]float32, 1000)
	for i := range v {
		v[i] = float32(i) - 500.25
	}
	v[17] = math.MaxFloat32
	v[18] = -math.MaxFloat32
	v[19] = math.SmallestNonzeroFloat32
	if i := firstNonFinite32(v); i != -1 {
		t.Fatalf("finite values: got %d", i)
	}
	for _, bad := range []float32{float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1)), math.Float32frombits(0xffc00001)} {
		for _, at := range []int{0, 255, 256, 511, 999} {
			w := slices.Clone(v)
			w[at] = bad
			w[999-at/2] = bad // a later one must not be reported first
			if i := firstNonFinite32(w); i != min(at, 999-at/2) {
				t.Errorf("%v at %d: got %d", bad, at, i)
			}
		}
	}
	h := []uint16{0x3c00, 0x7bff, 0xfbff, 0x0001, 0x7c00}
	if i := firstNonFinite16(h); i != 4 {
		t.Errorf("half infinity at 4: got %d", i)
	}
	if i := firstNonFinite16(h[:4]); i != -1 {
		t.Errorf("finite halves: got %d", i)
	}
}

// The baseline blob round-trips as the "baseline" U8 tensor, after the
// vocabulary bytes, without touching the JSON header.
func TestBaselineTensor(t *testing.T) {
	m := stModel(t, 5, 0, "")
	// A real encoding: Verify decodes it (TestVerifyUsable has garbage).
	b, err := nb.Fit([][]string{{"w1", "w2"}, {"w3"}, {"w4", "w0"}}, []int{0, 1, 2}, 3, 1)
	if err != nil {
		t.Fatal(err)
	}
	m.Baseline = b.Encode()
	var buf bytes.Buffer
	if err := m.Encode(&buf, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	got, err := Load(buf.Bytes(), "with-baseline")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got.Baseline, m.Baseline) {
		t.Fatalf("baseline %q, want %q", got.Baseline, m.Baseline)
	}
	if _, ok := got.Meta[TensorBaseline]; ok {
		t.Error("baseline also in the metadata")
	}
	if err := got.Verify(); err != nil {
		t.Fatal(err)
	}
}
