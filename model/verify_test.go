package model

import (
	"errors"
	"slices"
	"strings"
	"testing"

	"convtag/model/nb"
)

// TestVerifyUsable: Verify refuses files that open but that tag or eval
// cannot use: weights that are each finite but overflow the forward pass,
// a baseline that does not decode or cannot score, and an index that does
// not find every word or has no empty slot.
func TestVerifyUsable(t *testing.T) {
	edited := func(fold string, edit func(m *Model)) func() []byte {
		return func() []byte {
			m := stModel(t, 10, 0, fold)
			edit(m)
			return stBuild(t, m, func(_ map[string]string, ts []Tensor) []Tensor { return ts })
		}
	}
	// Encode refuses a bad index, so index edits go to the tensor bytes.
	index := func(edit func(ix []int32, v *Vocab)) func() []byte {
		return func() []byte {
			m := stModel(t, 10, 0, "")
			return stBuild(t, m, func(_ map[string]string, ts []Tensor) []Tensor {
				ix := slices.Clone(m.Vocab.index)
				edit(ix, m.Vocab)
				for i, e := range ix {
					stSetInt(ts, TensorVocabIndex, i, int64(e))
				}
				return ts
			})
		}
	}
	twoLabels, err := nb.Fit([][]string{{"w1"}, {"w2"}}, []int{0, 1}, 2, 1)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name   string
		raw    func() []byte
		err    error
		detail string
	}{
		{"dense weights overflow", edited("", func(m *Model) {
			for i := range m.Convs {
				for j := range m.Convs[i].B {
					m.Convs[i].B[j] = 1e30
				}
			}
			for i := range m.Out.W {
				m.Out.W[i] = 3e38
			}
		}), ErrForward, "an empty text (direct path) gives NaN"},
		{"fold table overflows", edited("F32", func(m *Model) {
			ft := m.Fold[0]
			for i := ft.Width * m.Config.Filters; i < len(ft.F32); i++ {
				ft.F32[i] = 3e38
			}
		}), ErrForward, "(folded path)"},
		{"garbage baseline", edited("", func(m *Model) { m.Baseline = []byte("nb1 opaque\x00bytes\n") }), ErrBaseline, "malformed"},
		{"baseline with other labels", edited("", func(m *Model) { m.Baseline = twoLabels.Encode() }), ErrBaseline, "2 labels, the model has 3"},
		{"baseline fitted on nothing", edited("", func(m *Model) { m.Baseline = []byte("nb1 3 1\n0 0 0\n") }), ErrBaseline, "no label has a finite score"},
		{"full index", index(func(ix []int32, _ *Vocab) {
			for i := range ix {
				ix[i] = 1
			}
		}), ErrVocab, "twice"},
		{"index that covers no word", index(func(ix []int32, _ *Vocab) { clear(ix) }), ErrVocab, "word 0 (\"w0\") is not in the index"},
		{"word off its probe chain", index(func(ix []int32, v *Vocab) {
			mask := len(ix) - 1
			home := int(Hash(v.Word(0)) & uint64(mask))
			at := -1
			for s, e := range ix {
				if e == 1 {
					at = s
				}
			}
			// An empty slot after an empty slot, not word 0's home:
			// a lookup of word 0 stops before it.
			for j := range ix {
				if j != home && ix[j] == 0 && ix[(j-1)&mask] == 0 && j != (at+1)&mask {
					ix[at], ix[j] = 0, 1
					return
				}
			}
			t.Fatal("no free pair of slots")
		}), ErrVocab, "never reaches"},
	} {
		t.Run(c.name, func(t *testing.T) {
			m, err := Load(c.raw(), "ferry.safetensors")
			if err != nil {
				t.Fatalf("Load: %v (these problems are for Verify to find)", err)
			}
			err = m.Verify()
			if !errors.Is(err, c.err) || !strings.Contains(err.Error(), c.detail) || !strings.HasPrefix(err.Error(), "model: ferry.safetensors: ") {
				t.Fatalf("Verify: %v, want %v with %q naming the file", err, c.err, c.detail)
			}
		})
	}
}

// TestMaxTokensRefusedAtOpen: a huge tokenizer.max_tokens is refused when
// the file is opened (TokenizerSettings.Validate), so Verify and
// inspect --verify, which open the file first, report it.
func TestMaxTokensRefusedAtOpen(t *testing.T) {
	m := stModel(t, 10, 0, "")
	raw := stBuild(t, m, func(meta map[string]string, ts []Tensor) []Tensor {
		meta[MetaTokenizer] = `{"keep_punct":true,"max_tokens":1073741824}`
		return ts
	})
	_, err := Load(raw, "ferry.safetensors")
	if !errors.Is(err, ErrMetadata) || !strings.Contains(err.Error(), "max_tokens 1073741824 out of range") {
		t.Fatalf("Load: %v", err)
	}
}

// TestLookupFullIndexEnds: Lookup of an unknown word in an index with no
// empty slot (which Verify refuses, but Open does not read) still ends,
// after one pass over the table, instead of probing for ever.
func TestLookupFullIndexEnds(t *testing.T) {
	v := NewVocab([]string{"pier", "tide", "gull"}, 4)
	for i := range v.index {
		v.index[i] = int32(1 + i%3)
	}
	if got := v.Lookup([]byte("lighthouse")); got != -1 {
		t.Errorf("Lookup of an unknown word = %d, want -1", got)
	}
	if got := v.Lookup([]byte("gull")); got != 2 {
		t.Errorf("Lookup(gull) = %d, want 2", got)
	}
}
