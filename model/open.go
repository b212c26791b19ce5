package model

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/bits"
	"os"
	"slices"
	"strconv"
	"strings"

	"convtag/model/linear"
	"convtag/model/safetensors"
	"convtag/model/token"
)

// safetensors.Tensor names of a model file (see the contract in Encode's doc).
const (
	TensorEmbedding    = "embedding"
	TensorVocabOffsets = "vocab.offsets"
	TensorVocabIndex   = "vocab.index"
	TensorVocabBytes   = "vocab.bytes"
	TensorBaseline     = "baseline" // optional U8 blob: the naive-Bayes baseline

	// The optional linear baseline (package linear's arrays, as they are):
	// the n-grams' bytes and offsets, the hash index, the idf, the weights
	// [features][labels] and the intercepts [labels].
	TensorLinearGrams   = "linear.grams"
	TensorLinearOffsets = "linear.offsets"
	TensorLinearIndex   = "linear.index"
	TensorLinearIDF     = "linear.idf"
	TensorLinearWeights = "linear.weights"
	TensorLinearBias    = "linear.bias"
	TensorHiddenW       = "hidden.weight"
	TensorHiddenB       = "hidden.bias"
	TensorOutputW       = "output.weight"
	TensorOutputB       = "output.bias"
)

// ConvWeightName, ConvBiasName and FoldName name the per-width tensors of
// width number i (in Config.Widths order).
func ConvWeightName(i int) string { return "convs." + strconv.Itoa(i) + ".weight" }

// ConvBiasName names width i's convolution bias.
func ConvBiasName(i int) string { return "convs." + strconv.Itoa(i) + ".bias" }

// FoldName names width i's folded table.
func FoldName(i int) string { return "fold." + strconv.Itoa(i) }

// Metadata keys this package reads and writes. All values are strings;
// those marked JSON hold a JSON document.
const (
	MetaFormat        = "format"         // always FormatName
	MetaFormatVersion = "format_version" // decimal FormatVersion
	MetaLabels        = "labels"         // JSON array of strings
	MetaConfig        = "config"         // JSON of Config
	MetaTokenizer     = "tokenizer"      // JSON of token.Settings
	MetaTraining      = "training"       // JSON training summary, optional, written by training
	MetaChecksum      = "checksum"       // "sha256:" + hex of the whole data buffer
	MetaCreatedBy     = "created_by"     // "convtag " + SaveOptions.Version
	MetaLinearC       = "linear_c"       // the linear baseline's C, when it is stored
)

// FormatName is the value of the "format" metadata key.
const FormatName = "convtag"

// source is where an opened model's bytes live.
type source struct {
	name string
	file []byte // the whole file; the tensors alias it
	data int    // offset of the data buffer in file
}

// Open memory-maps the model file at path (read-only, shared) and checks it
// as Load does; the tensors are views of the mapping. Close the model to
// unmap it. On systems without mmap the file is read into memory.
//
// The mapping stays valid while the file is replaced (Save writes a new
// file and renames it), but truncating the file in place while it is
// mapped makes a read of the lost pages fault (SIGBUS), and a same-size
// overwrite changes the model under its readers: never do either. A reader
// that must survive that runs with debug.SetPanicOnFault, as the stream
// workers do. A file that cannot be mapped is read, at most MaxReadSize
// bytes.
func Open(path string) (*Model, error) {
	b, unmap, err := mapFile(path)
	if err != nil {
		return nil, fmt.Errorf("open model: %w", err)
	}
	m, err := Load(b, path)
	if err != nil {
		if unmap != nil {
			unmap()
		}
		return nil, err
	}
	m.closer = unmap
	return m, nil
}

// MaxReadSize is the most Open reads from a model file it does not map
// (a pipe or device, or any file where there is no mmap): a model is read
// whole, so a source that never ends, such as /dev/zero, must not be
// read forever.
const MaxReadSize = 4 << 30

// readLimit is MaxReadSize; tests lower it.
var readLimit int64 = MaxReadSize

// readFile is the portable way to get a file's bytes, and Open's fallback.
// It reads at most readLimit bytes and one more, to tell a file of exactly
// the limit from a longer one. A header length that safetensors.Parse would
// refuse (zero, as /dev/zero gives, or over safetensors.MaxHeader) stops the read after
// those 8 bytes, which Load then rejects with the container's own error.
func readFile(path string) ([]byte, func() error, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	head := make([]byte, 8)
	k, err := io.ReadFull(f, head)
	if err != nil {
		if err == io.EOF || err == io.ErrUnexpectedEOF {
			return head[:k], nil, nil // too short: Load says so
		}
		return nil, nil, err
	}
	if n := binary.LittleEndian.Uint64(head); n == 0 || n > safetensors.MaxHeader {
		return head, nil, nil
	}
	rest, err := io.ReadAll(io.LimitReader(f, readLimit+1-int64(len(head))))
	if err != nil {
		return nil, nil, err
	}
	b := append(head, rest...)
	if int64(len(b)) > readLimit {
		return nil, nil, fmt.Errorf("%s: more than %d bytes, too long for a model file (one that cannot be memory-mapped is read whole)", path, readLimit)
	}
	return b, nil, nil
}

// Load checks the model file held in b and returns a model whose tensors
// are zero-copy views of b, so b must stay unchanged while the model is in
// use (an embedded file's bytes, a mapping). name is used in errors only.
// A tensor that is not aligned in memory for its type, or any tensor on a
// big-endian host, is copied instead.
//
// After the container checks of safetensors.Parse it checks the schema: the
// format and format_version metadata, labels, config and tokenizer
// settings, that every tensor the config calls for is present with its
// dtype and shape and no other is, the vocabulary (offsets non-decreasing
// and ending at the blob's end, a power-of-two index larger than the
// vocabulary whose entries are word numbers), a zero padding row, and that
// the convolution and dense weights are finite. The embedding and fold
// tables grow with the vocabulary, so Load does not read them: Verify
// checks them and the checksum. Errors are *FormatError naming the file.
func Load(b []byte, name string) (*Model, error) {
	m, err := load(b, name)
	if err != nil {
		var fe *FormatError
		if errors.As(err, &fe) {
			fe.File = name
			return nil, fe
		}
		return nil, &FormatError{File: name, Err: err}
	}
	return m, nil
}

func load(b []byte, name string) (*Model, error) {
	meta, tensors, err := safetensors.Parse(b)
	if err != nil {
		return nil, fromContainer(err)
	}
	m, err := assemble(meta, tensors)
	if err != nil {
		return nil, err
	}
	n := binary.LittleEndian.Uint64(b) // checked by safetensors.Parse
	m.src = &source{name: name, file: b, data: 8 + int(n)}
	return m, nil
}

// decodeMeta decodes a JSON metadata value into v, rejecting duplicate and
// unknown keys and trailing data.
func decodeMeta(meta map[string]string, key string, v any) error {
	s, ok := meta[key]
	if !ok {
		return fmt.Errorf("%w: no %q", ErrMetadata, key)
	}
	if err := checkNoDuplicateKeys([]byte(s)); err != nil {
		return fmt.Errorf("%w: %s: %v", ErrMetadata, key, err)
	}
	dec := json.NewDecoder(strings.NewReader(s))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return fmt.Errorf("%w: %s: %v", ErrMetadata, key, err)
	}
	if dec.More() {
		return fmt.Errorf("%w: %s: data after the JSON value", ErrMetadata, key)
	}
	return nil
}

// assemble checks a parsed container against the model schema and builds
// the model over its tensors.
func assemble(meta map[string]string, tensors []safetensors.Tensor) (*Model, error) {
	if f, ok := meta[MetaFormat]; !ok || f != FormatName {
		return nil, fmt.Errorf("%w: format %s, want %q", ErrNotModel, quoteCapped(f), FormatName)
	}
	if v := meta[MetaFormatVersion]; v != strconv.Itoa(FormatVersion) {
		return nil, fmt.Errorf("%w: %s, this build reads %d", ErrVersion, quoteCapped(v), FormatVersion)
	}
	m := &Model{Meta: meta}
	if err := decodeMeta(meta, MetaConfig, &m.Config); err != nil {
		return nil, err
	}
	if err := m.Config.Validate(); err != nil {
		return nil, fmt.Errorf("%w: config: %v", ErrMetadata, err)
	}
	if err := decodeMeta(meta, MetaTokenizer, &m.TokenSettings); err != nil {
		return nil, err
	}
	if err := m.TokenSettings.Validate(); err != nil {
		return nil, fmt.Errorf("%w: tokenizer: %v", ErrMetadata, err)
	}
	if err := decodeMeta(meta, MetaLabels, &m.Labels); err != nil {
		return nil, err
	}
	if len(m.Labels) < 2 {
		return nil, fmt.Errorf("%w: need at least 2 labels, have %d", ErrMetadata, len(m.Labels))
	}
	if i := firstDuplicate(m.Labels); i >= 0 {
		return nil, fmt.Errorf("%w: duplicate label %s", ErrMetadata, quoteCapped(m.Labels[i]))
	}
	if err := m.decodeMulti(); err != nil {
		return nil, err
	}
	if c, ok := meta[MetaChecksum]; ok {
		if _, err := parseChecksum(c); err != nil {
			return nil, err
		}
	}

	s := &schema{byName: make(map[string]*safetensors.Tensor, len(tensors))}
	for i := range tensors {
		s.byName[tensors[i].Name] = &tensors[i]
	}
	if err := s.build(m); err != nil {
		return nil, err
	}
	if v, ok := meta[MetaScorer]; ok {
		sc, err := decodeScorer(v)
		if err == nil {
			err = sc.check(m)
		}
		if err != nil {
			return nil, fmt.Errorf("%w: %s: %v", ErrMetadata, MetaScorer, err)
		}
		m.Scorer = sc
	}
	var extra []string
	for name := range s.byName {
		if !s.used[name] {
			extra = append(extra, name)
		}
	}
	if len(extra) > 0 {
		// Sorted, so that the same file always gives the same message
		// (map order changes from run to run).
		slices.Sort(extra)
		more := ""
		if len(extra) > 1 {
			more = fmt.Sprintf(" (and %d more unexpected tensors)", len(extra)-1)
		}
		return nil, formatErr(extra[0], ErrUnexpectedTensor, "not part of this model's config%s", more)
	}
	m.tok = token.New(m.TokenSettings)
	return m, nil
}

// schema hands out the tensors the config calls for, checked.
type schema struct {
	byName map[string]*safetensors.Tensor
	used   map[string]bool
}

// get returns the named tensor after checking its dtype and shape.
func (s *schema) get(name string, dtype safetensors.DType, shape ...int) (*safetensors.Tensor, error) {
	t, ok := s.byName[name]
	if !ok {
		return nil, formatErr(name, ErrMissingTensor, "")
	}
	if s.used == nil {
		s.used = map[string]bool{}
	}
	s.used[name] = true
	if t.DType != dtype {
		return nil, formatErr(name, ErrSchema, "dtype %s, want %s", t.DType, dtype)
	}
	if !equalInts(t.Shape, shape) {
		return nil, formatErr(name, ErrSchema, "shape %v, want %v", t.Shape, shape)
	}
	return t, nil
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

// f32 returns the named F32 tensor as a float32 view (or copy).
func (s *schema) f32(name string, shape ...int) ([]float32, error) {
	t, err := s.get(name, "F32", shape...)
	if err != nil {
		return nil, err
	}
	return safetensors.ViewF32(t.Data), nil
}

// finite32 is f32 for a tensor whose every value must be finite.
func (s *schema) finite32(name string, shape ...int) ([]float32, error) {
	v, err := s.f32(name, shape...)
	if err != nil {
		return nil, err
	}
	if i := firstNonFinite32(v); i >= 0 {
		return nil, formatErr(name, ErrNotFinite, "element %d is %v", i, v[i])
	}
	return v, nil
}

func (s *schema) build(m *Model) error {
	cfg := m.Config
	d, f := cfg.Dim, cfg.Filters

	// The vocabulary first: its size fixes the number of embedding rows.
	offsT, ok := s.byName[TensorVocabOffsets]
	if !ok || len(offsT.Shape) != 1 || offsT.Shape[0] < 1 {
		if !ok {
			return formatErr(TensorVocabOffsets, ErrMissingTensor, "")
		}
		return formatErr(TensorVocabOffsets, ErrSchema, "shape %v, want [V+1]", offsT.Shape)
	}
	nWords := offsT.Shape[0] - 1
	if nWords > math.MaxInt32-1 {
		return formatErr(TensorVocabOffsets, ErrVocab, "%d words; the index holds at most %d", nWords, math.MaxInt32-1)
	}
	t, err := s.get(TensorVocabOffsets, "I64", nWords+1)
	if err != nil {
		return err
	}
	offs := safetensors.ViewI64(t.Data)
	blobT, ok := s.byName[TensorVocabBytes]
	if !ok {
		return formatErr(TensorVocabBytes, ErrMissingTensor, "")
	}
	t, err = s.get(TensorVocabBytes, "U8", len(blobT.Data))
	if err != nil {
		return err
	}
	blob := t.Data
	if offs[0] != 0 || offs[nWords] != int64(len(blob)) {
		return formatErr(TensorVocabOffsets, ErrVocab, "offsets run %d..%d, want 0..%d (the word bytes' length)", offs[0], offs[nWords], len(blob))
	}
	idxT, ok := s.byName[TensorVocabIndex]
	if !ok {
		return formatErr(TensorVocabIndex, ErrMissingTensor, "")
	}
	size := 0
	if len(idxT.Shape) == 1 {
		size = idxT.Shape[0]
	}
	if size < 8 || size <= nWords || bits.OnesCount(uint(size)) != 1 {
		return formatErr(TensorVocabIndex, ErrVocab, "shape %v, want [S] with S a power of two, at least 8 and above the %d words", idxT.Shape, nWords)
	}
	t, err = s.get(TensorVocabIndex, "I32", size)
	if err != nil {
		return err
	}
	index := safetensors.ViewI32(t.Data)
	m.Vocab = &Vocab{blob: blob, offs: offs, index: index, buckets: cfg.Buckets}

	rows := m.Rows()
	if m.Emb, err = s.f32(TensorEmbedding, rows, d); err != nil {
		return err
	}
	for j, x := range m.Emb[:d] {
		if x != 0 {
			return formatErr(TensorEmbedding, ErrSchema, "padding row 0 has %v at column %d, must be zero", x, j)
		}
	}
	m.Convs = make([]Conv, len(cfg.Widths))
	for i, w := range cfg.Widths {
		c := &m.Convs[i]
		c.Width = w
		if c.W, err = s.finite32(ConvWeightName(i), f, d, w); err != nil {
			return err
		}
		if c.B, err = s.finite32(ConvBiasName(i), f); err != nil {
			return err
		}
	}
	in := cfg.Features()
	if cfg.Hidden > 0 {
		h := &Dense{In: in, Out: cfg.Hidden}
		if h.W, err = s.finite32(TensorHiddenW, h.Out, h.In); err != nil {
			return err
		}
		if h.B, err = s.finite32(TensorHiddenB, h.Out); err != nil {
			return err
		}
		m.Hidden = h
		in = cfg.Hidden
	}
	m.Out = Dense{In: in, Out: len(m.Labels)}
	if m.Out.W, err = s.finite32(TensorOutputW, m.Out.Out, m.Out.In); err != nil {
		return err
	}
	if m.Out.B, err = s.finite32(TensorOutputB, m.Out.Out); err != nil {
		return err
	}
	if t, ok := s.byName[TensorBaseline]; ok {
		if t, err = s.get(TensorBaseline, "U8", len(t.Data)); err != nil {
			return err
		}
		m.Baseline = t.Data
	}
	if err := s.buildLinear(m); err != nil {
		return err
	}
	return s.buildFold(m, rows)
}

// buildLinear views the linear baseline's tensors, if the file has them,
// checking their shapes only (O(1)): Verify checks offsets, index and
// finiteness, as for the vocabulary.
func (s *schema) buildLinear(m *Model) error {
	gt, ok := s.byName[TensorLinearGrams]
	if !ok {
		for _, n := range []string{TensorLinearOffsets, TensorLinearIndex, TensorLinearIDF, TensorLinearWeights, TensorLinearBias} {
			if _, ok := s.byName[n]; ok {
				return formatErr(TensorLinearGrams, ErrMissingTensor, "the file has %s", n)
			}
		}
		return nil
	}
	ot, ok := s.byName[TensorLinearOffsets]
	if !ok || len(ot.Shape) != 1 || ot.Shape[0] < 1 {
		if !ok {
			return formatErr(TensorLinearOffsets, ErrMissingTensor, "")
		}
		return formatErr(TensorLinearOffsets, ErrSchema, "shape %v, want [F+1]", ot.Shape)
	}
	nf := ot.Shape[0] - 1
	it, ok := s.byName[TensorLinearIndex]
	if !ok || len(it.Shape) != 1 {
		if !ok {
			return formatErr(TensorLinearIndex, ErrMissingTensor, "")
		}
		return formatErr(TensorLinearIndex, ErrSchema, "shape %v, want [slots]", it.Shape)
	}
	l := len(m.Labels)
	var err error
	var v linear.Vocabulary
	if gt, err = s.get(TensorLinearGrams, "U8", len(gt.Data)); err != nil {
		return err
	}
	v.Grams = gt.Data
	if ot, err = s.get(TensorLinearOffsets, "I64", nf+1); err != nil {
		return err
	}
	v.Offsets = safetensors.ViewI64(ot.Data)
	if it, err = s.get(TensorLinearIndex, "I32", it.Shape[0]); err != nil {
		return err
	}
	v.Index = safetensors.ViewI32(it.Data)
	if v.IDF, err = s.f32(TensorLinearIDF, nf); err != nil {
		return err
	}
	w, err := s.f32(TensorLinearWeights, nf, l)
	if err != nil {
		return err
	}
	b, err := s.finite32(TensorLinearBias, l)
	if err != nil {
		return err
	}
	c, _ := strconv.ParseFloat(m.Meta[MetaLinearC], 64)
	if m.Linear, err = linear.New(v, w, b, c); err != nil {
		return formatErr(TensorLinearGrams, ErrBaseline, "%v", err)
	}
	return nil
}

// checkOffsets checks that the word offsets start at 0, never decrease and
// end at the blob's end. It reads 8 bytes per word, so Load leaves it (and
// checkIndex) to Verify: opening stays independent of the vocabulary's
// size, and Vocab.Word and Lookup stay in bounds on their own.
func checkOffsets(offs []int64, blobLen int) error {
	if offs[0] != 0 {
		return formatErr(TensorVocabOffsets, ErrVocab, "first offset %d, want 0", offs[0])
	}
	for i := 1; i < len(offs); i++ {
		if offs[i] < offs[i-1] {
			return formatErr(TensorVocabOffsets, ErrVocab, "offset %d (%d) is below offset %d (%d)", i, offs[i], i-1, offs[i-1])
		}
	}
	if last := offs[len(offs)-1]; last != int64(blobLen) {
		return formatErr(TensorVocabOffsets, ErrVocab, "last offset %d, but the word bytes are %d long", last, blobLen)
	}
	return nil
}

// checkIndex checks the vocabulary's index: every entry is 0 (empty) or a
// word number plus one, so that Vocab.Lookup stays in bounds; every word is
// in it exactly once, so that (the index being larger than the vocabulary)
// empty slots remain to end an unknown word's probe, which would otherwise
// read the whole table on every lookup; and every word sits on the probe
// chain from its home slot with no empty slot between, so that Lookup finds
// it. It costs one pass over the index and one hash of every word.
func checkIndex(v *Vocab) error {
	index, nWords := v.index, v.Len()
	var hi uint32 // the largest entry, negative ones counting as huge
	for _, e := range index {
		hi = max(hi, uint32(e))
	}
	if hi > uint32(nWords) {
		for i, e := range index {
			if uint32(e) > uint32(nWords) {
				return formatErr(TensorVocabIndex, ErrVocab, "entry %d is %d, outside 0..%d", i, e, nWords)
			}
		}
	}
	seen := make([]uint64, (nWords+63)/64)
	empty := -1
	for i, e := range index {
		if e == 0 {
			empty = i
			continue
		}
		w := int(e - 1)
		if seen[w/64]&(1<<(w%64)) != 0 {
			return formatErr(TensorVocabIndex, ErrVocab, "word %d (%s) is in the index twice, the second time at entry %d", w, quoteCapped(string(v.Word(w))), i)
		}
		seen[w/64] |= 1 << (w % 64)
	}
	for w := range nWords {
		if seen[w/64]&(1<<(w%64)) == 0 {
			return formatErr(TensorVocabIndex, ErrVocab, "word %d (%s) is not in the index", w, quoteCapped(string(v.Word(w))))
		}
	}
	if empty < 0 { // every word once in more slots than words: cannot happen
		return formatErr(TensorVocabIndex, ErrVocab, "no empty entry")
	}
	// Walk the table once, starting after an empty slot, counting the
	// filled slots since the last empty one: a word at distance d from
	// its home slot is reachable when d < that count.
	mask := len(index) - 1
	run := 0
	for k := 1; k <= len(index); k++ {
		s := (empty + k) & mask
		e := index[s]
		if e == 0 {
			run = 0
			continue
		}
		run++
		w := int(e - 1)
		home := int(Hash(v.Word(w)) & uint64(mask))
		if (s-home)&mask >= run {
			return formatErr(TensorVocabIndex, ErrVocab, "word %d (%s) is at entry %d, which its lookup from entry %d never reaches", w, quoteCapped(string(v.Word(w))), s, home)
		}
	}
	return nil
}

// buildFold picks up the optional fold tables: one per width or none, all
// of one dtype, F32 or F16.
func (s *schema) buildFold(m *Model, rows int) error {
	cfg := m.Config
	f := cfg.Filters
	first, ok := s.byName[FoldName(0)]
	if !ok {
		for i := range cfg.Widths {
			if _, ok := s.byName[FoldName(i)]; ok {
				return formatErr(FoldName(0), ErrMissingTensor, "fold tables must cover every width or none")
			}
		}
		return nil
	}
	dtype := first.DType
	if dtype != "F32" && dtype != "F16" {
		return formatErr(FoldName(0), ErrSchema, "dtype %s, want F32 or F16", dtype)
	}
	m.Fold = make([]FoldTable, len(cfg.Widths))
	for i, w := range cfg.Widths {
		t, err := s.get(FoldName(i), dtype, rows, w, f)
		if err != nil {
			if errors.Is(err, ErrMissingTensor) {
				return formatErr(FoldName(i), ErrMissingTensor, "fold tables must cover every width or none")
			}
			return err
		}
		ft := &m.Fold[i]
		ft.Width = w
		// Row 0 is padding: its responses are zero, as the padding vector is.
		if dtype == "F32" {
			ft.F32 = safetensors.ViewF32(t.Data)
			for j, x := range ft.F32[:w*f] {
				if x != 0 {
					return formatErr(FoldName(i), ErrSchema, "padding row 0 has %v at %d, must be zero", x, j)
				}
			}
		} else {
			ft.F16 = safetensors.ViewU16(t.Data)
			for j, x := range ft.F16[:w*f] {
				if x&0x7fff != 0 {
					return formatErr(FoldName(i), ErrSchema, "padding row 0 has half 0x%04x at %d, must be zero", x, j)
				}
			}
		}
	}
	return nil
}

// firstNonFinite32 returns the index of the first NaN or infinity in v, or
// -1. A float32 is not finite when its exponent bits are all ones; adding 1
// to the exponent field then carries into the sign bit's position, so
// blocks are scanned without a branch per element by OR-ing those carries.
func firstNonFinite32(v []float32) int {
	const block = 256
	for lo := 0; lo < len(v); lo += block {
		blk := v[lo:min(lo+block, len(v))]
		var acc uint32
		for _, x := range blk {
			acc |= math.Float32bits(x)&0x7f800000 + 0x00800000
		}
		if acc&0x80000000 == 0 {
			continue
		}
		for i, x := range blk {
			if math.Float32bits(x)&0x7f800000 == 0x7f800000 {
				return lo + i
			}
		}
	}
	return -1
}

func firstNonFinite16(v []uint16) int {
	for i, x := range v {
		if x&0x7c00 == 0x7c00 {
			return i
		}
	}
	return -1
}
