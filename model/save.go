package model

import (
	"bufio"
	"cmp"
	"crypto/rand"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash"
	"io"
	"io/fs"
	"maps"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"convtag/model/safetensors"
)

// SaveOptions say what Encode and Save record besides the model. The zero
// value is usable.
type SaveOptions struct {
	// Version is the writing program's version, recorded in the created_by
	// metadata key as "convtag " + Version; "" records "dev".
	Version string
}

// Encode writes the model as a safetensors file. Tensors are packed so that
// every one starts aligned for its element type: vocab.offsets (I64)
// first, then the F32 tensors (embedding, convs.{i}.weight and .bias,
// hidden.*, output.*, F32 fold tables), vocab.index (I32), F16 fold tables,
// and vocab.bytes (U8) last. The metadata is m.Meta with this package's
// keys (format, format_version, labels, config, tokenizer, checksum,
// created_by) set from the model; other keys, such as training, are kept.
// The same model always gives the same bytes. Encode checks the model as
// Load would, including that every weight is finite, and writes nothing
// when it fails.
func (m *Model) Encode(w io.Writer, o SaveOptions) error {
	meta, tensors, err := m.container(o)
	if err != nil {
		return err
	}
	return fromContainer(safetensors.Encode(w, meta, tensors))
}

// container returns the model's metadata and tensors, ready to encode and
// checked against the schema.
func (m *Model) container(o SaveOptions) (map[string]string, []safetensors.Tensor, error) {
	if m.Vocab == nil {
		return nil, nil, fmt.Errorf("model: encode: no vocabulary")
	}
	tensors := m.tensors()
	for _, t := range tensors {
		if n, ok := safetensors.ByteSize(t.DType, t.Shape); !ok || n != uint64(len(t.Data)) {
			return nil, nil, formatErr(t.Name, safetensors.ErrShape, "%d bytes do not fill %s %v", len(t.Data), t.DType, t.Shape)
		}
	}
	meta := maps.Clone(m.Meta)
	if meta == nil {
		meta = map[string]string{}
	}
	meta[MetaFormat] = FormatName
	meta[MetaFormatVersion] = strconv.Itoa(FormatVersion)
	meta[MetaLabels] = mustJSON(m.Labels)
	meta[MetaConfig] = mustJSON(m.Config)
	meta[MetaTokenizer] = mustJSON(m.TokenSettings)
	meta[MetaCreatedBy] = "convtag " + cmp.Or(o.Version, "dev")
	delete(meta, MetaLinearC)
	if m.Linear != nil {
		meta[MetaLinearC] = strconv.FormatFloat(m.Linear.C, 'g', -1, 64)
	}
	delete(meta, MetaScorer)
	if m.Scorer.kind() != ScoreNetwork {
		meta[MetaScorer] = encodeScorer(m.Scorer)
	}
	if err := m.putMulti(meta); err != nil {
		return nil, nil, err
	}
	h := sha256.New()
	for _, t := range tensors {
		h.Write(t.Data)
	}
	meta[MetaChecksum] = checksumString(h)

	// The writer must never produce a file the loader refuses.
	check, err := assemble(meta, tensors)
	if err != nil {
		return nil, nil, err
	}
	if err := check.checkLarge(); err != nil {
		return nil, nil, err
	}
	return meta, tensors, nil
}

// tensors lists the model's tensors in file order (see Encode). Data views
// the model's slices on a little-endian host and is a converted copy
// otherwise.
func (m *Model) tensors() []safetensors.Tensor {
	d, f := m.Config.Dim, m.Config.Filters
	var ts []safetensors.Tensor
	add := func(name string, dtype safetensors.DType, data []byte, shape ...int) {
		ts = append(ts, safetensors.Tensor{Name: name, DType: dtype, Shape: shape, Data: data})
	}
	v := m.Vocab
	add(TensorVocabOffsets, "I64", safetensors.Bytes(v.offs), len(v.offs))
	// The linear baseline's arrays go with the others of their element
	// size, so every tensor stays aligned (the n-grams last, with the other
	// bytes); a model without one is laid out as before.
	lm := m.Linear
	if lm != nil {
		add(TensorLinearOffsets, "I64", safetensors.Bytes(lm.Offsets), len(lm.Offsets))
	}
	add(TensorEmbedding, "F32", safetensors.Bytes(m.Emb), len(m.Emb)/max(d, 1), d)
	for i, c := range m.Convs {
		add(ConvWeightName(i), "F32", safetensors.Bytes(c.W), f, d, c.Width)
		add(ConvBiasName(i), "F32", safetensors.Bytes(c.B), len(c.B))
	}
	if h := m.Hidden; h != nil {
		add(TensorHiddenW, "F32", safetensors.Bytes(h.W), h.Out, h.In)
		add(TensorHiddenB, "F32", safetensors.Bytes(h.B), len(h.B))
	}
	add(TensorOutputW, "F32", safetensors.Bytes(m.Out.W), m.Out.Out, m.Out.In)
	add(TensorOutputB, "F32", safetensors.Bytes(m.Out.B), len(m.Out.B))
	if lm != nil {
		add(TensorLinearWeights, "F32", safetensors.Bytes(lm.Weights), lm.Len(), lm.Labels())
		add(TensorLinearIDF, "F32", safetensors.Bytes(lm.IDF), len(lm.IDF))
		add(TensorLinearBias, "F32", safetensors.Bytes(lm.Bias), len(lm.Bias))
	}
	foldShape := func(ft FoldTable, n int) []int {
		return []int{n / max(ft.Width*f, 1), ft.Width, f}
	}
	for i, ft := range m.Fold {
		if ft.F16 == nil {
			add(FoldName(i), "F32", safetensors.Bytes(ft.F32), foldShape(ft, len(ft.F32))...)
		}
	}
	add(TensorVocabIndex, "I32", safetensors.Bytes(v.index), len(v.index))
	if lm != nil {
		add(TensorLinearIndex, "I32", safetensors.Bytes(lm.Index), len(lm.Index))
	}
	for i, ft := range m.Fold {
		if ft.F16 != nil {
			add(FoldName(i), "F16", safetensors.Bytes(ft.F16), foldShape(ft, len(ft.F16))...)
		}
	}
	add(TensorVocabBytes, "U8", v.blob, len(v.blob))
	if len(m.Baseline) > 0 {
		add(TensorBaseline, "U8", m.Baseline, len(m.Baseline))
	}
	if lm != nil {
		add(TensorLinearGrams, "U8", lm.Grams, len(lm.Grams))
	}
	return ts
}

func mustJSON(v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		panic("model: " + err.Error()) // only plain structs and slices of strings come here
	}
	return string(b)
}

// Save writes the model to path atomically: it encodes into a temporary
// file in the same directory, syncs it and renames it over path, so a
// reader never sees a partial file and a process that has the old file
// mapped keeps its (unchanged) pages. The file is created with mode 0666
// less the umask, like any other output. On every failure, a panic
// included, the temporary file is removed and path is left as it was.
func (m *Model) Save(path string, o SaveOptions) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := createTemp(dir, "."+base+".", ".tmp")
	if err != nil {
		return fmt.Errorf("save model: %w", err)
	}
	tmp := f.Name()
	done := false
	defer func() {
		if !done {
			f.Close()
			os.Remove(tmp)
		}
		if err != nil {
			err = fmt.Errorf("save model %s: %w", path, err)
		}
	}()
	bw := bufio.NewWriterSize(saveWriter(f), 1<<20)
	if err = m.Encode(bw, o); err != nil {
		return err
	}
	if err = bw.Flush(); err != nil {
		return err
	}
	if err = f.Sync(); err != nil {
		return err
	}
	if err = f.Close(); err != nil {
		return err
	}
	if err = os.Rename(tmp, path); err != nil {
		return err
	}
	done = true
	syncDir(dir)
	return nil
}

// saveWriter is where Save encodes to; tests replace it to fail a write
// midway.
var saveWriter = func(f *os.File) io.Writer { return f }

// createTemp creates a new file prefix+random+suffix in dir for writing,
// with mode 0666 less the umask (os.CreateTemp would give 0600 whatever
// the umask, and a chmod afterwards would ignore it).
func createTemp(dir, prefix, suffix string) (*os.File, error) {
	for range 100 {
		var r [8]byte
		rand.Read(r[:])
		name := filepath.Join(dir, prefix+hex.EncodeToString(r[:])+suffix)
		f, err := os.OpenFile(name, os.O_CREATE|os.O_EXCL|os.O_WRONLY, 0o666)
		if !errors.Is(err, fs.ErrExist) {
			return f, err
		}
	}
	return nil, fmt.Errorf("create a temporary file in %s: too many name collisions", dir)
}

// syncDir makes a rename durable where the system allows syncing a
// directory; elsewhere the error is of no use and is dropped.
func syncDir(dir string) {
	d, err := os.Open(dir)
	if err != nil {
		return
	}
	d.Sync()
	d.Close()
}

// Checksum returns "sha256:" and the hex SHA-256 of the model's data
// buffer: the file's bytes after the header when the model was opened or
// loaded, and what Encode would write otherwise.
func (m *Model) Checksum() (string, error) {
	h := sha256.New()
	if m.src != nil {
		h.Write(m.src.file[m.src.data:])
		return checksumString(h), nil
	}
	if m.Vocab == nil {
		return "", fmt.Errorf("model: checksum: no vocabulary")
	}
	for _, t := range m.tensors() {
		h.Write(t.Data)
	}
	return checksumString(h), nil
}

func checksumString(h hash.Hash) string {
	return "sha256:" + hex.EncodeToString(h.Sum(nil))
}

// parseChecksum checks the form of a checksum value.
func parseChecksum(s string) ([]byte, error) {
	hexPart, ok := strings.CutPrefix(s, "sha256:")
	sum, err := hex.DecodeString(hexPart)
	if !ok || err != nil || len(sum) != sha256.Size || strings.ToLower(hexPart) != hexPart {
		return nil, fmt.Errorf("%w: checksum %q is not sha256:<64 lowercase hex digits>", ErrMetadata, s)
	}
	return sum, nil
}

// Verify reads the whole model: it recomputes the checksum of the data
// buffer and compares it with the checksum metadata, checks that every
// weight, including the embedding and fold tables that Load leaves unread,
// is finite, that the vocabulary index finds every word and leaves empty
// slots, that the forward pass gives probabilities on a few probe texts
// (see checkProbes), and that the baseline, when there is one, decodes and
// can score. It returns a *FormatError naming the file (when there is
// one); ErrNoChecksum when the metadata has no checksum, ErrChecksum on a
// mismatch, ErrNotFinite for a NaN or infinity, ErrVocab for a bad index,
// ErrForward for a forward pass that overflows, ErrBaseline for a bad
// baseline.
func (m *Model) Verify() error {
	name := ""
	if m.src != nil {
		name = m.src.name
	}
	fail := func(err error) error {
		if fe, ok := err.(*FormatError); ok {
			fe.File = name
			return fe
		}
		return &FormatError{File: name, Err: err}
	}
	want, ok := m.Meta[MetaChecksum]
	if !ok {
		return fail(ErrNoChecksum)
	}
	if _, err := parseChecksum(want); err != nil {
		return fail(err)
	}
	got, err := m.Checksum()
	if err != nil {
		return fail(err)
	}
	if got != want {
		return fail(fmt.Errorf("%w: metadata says %s, data gives %s", ErrChecksum, want, got))
	}
	if err := m.checkLarge(); err != nil {
		return fail(err)
	}
	if err := m.checkLinear(); err != nil {
		return fail(err)
	}
	if err := m.checkProbes(); err != nil {
		return fail(err)
	}
	if err := m.checkBaseline(); err != nil {
		return fail(err)
	}
	return nil
}

// checkLarge checks the tensors whose size grows with the vocabulary, which
// Load does not read: the embedding and the fold tables must be finite.
func (m *Model) checkLarge() error {
	if v := m.Vocab; v != nil {
		if err := checkOffsets(v.offs, len(v.blob)); err != nil {
			return err
		}
		if err := checkIndex(v); err != nil {
			return err
		}
	}
	if i := firstNonFinite32(m.Emb); i >= 0 {
		return formatErr(TensorEmbedding, ErrNotFinite, "row %d column %d is %v", i/m.Config.Dim, i%m.Config.Dim, m.Emb[i])
	}
	for k, ft := range m.Fold {
		if i := firstNonFinite32(ft.F32); i >= 0 {
			return formatErr(FoldName(k), ErrNotFinite, "element %d is %v", i, ft.F32[i])
		}
		if i := firstNonFinite16(ft.F16); i >= 0 {
			return formatErr(FoldName(k), ErrNotFinite, "element %d is half 0x%04x", i, ft.F16[i])
		}
	}
	return nil
}
