package model

import (
	"bytes"
	"encoding/binary"
	"math/bits"
)

// Vocab maps tokens to embedding rows without building anything at open
// time: the words are one byte blob with offsets, and the hash index is a
// prebuilt open-addressing table stored in the model file.
//
// Row layout: 0 is padding, 1..Len() the known words in order, and
// Len()+1 .. Len()+Buckets the shared rows that unknown words hash into.
// A Vocab is read-only and safe for concurrent use.
type Vocab struct {
	blob    []byte
	offs    []int64 // Len()+1 offsets into blob, non-decreasing, offs[0] == 0
	index   []int32 // power-of-two size; word index + 1, or 0 for empty
	buckets int
}

// Hash is the vocabulary's fixed hash: 64-bit FNV-1a over the token's bytes
// (the token as the tokenizer writes it: NFKC, case-folded UTF-8). It picks
// both the index slot of a known word and the bucket of an unknown one
// (Hash % Buckets). It must never change: model files depend on it.
func Hash(tok []byte) uint64 {
	h := uint64(14695981039346656037)
	for _, c := range tok {
		h ^= uint64(c)
		h *= 1099511628211
	}
	return h
}

// NewVocab builds a vocabulary of distinct words (duplicates are the
// caller's error and make later copies unreachable) with the given number of
// buckets.
func NewVocab(words []string, buckets int) *Vocab {
	v := &Vocab{buckets: buckets, offs: make([]int64, 1, len(words)+1)}
	for _, w := range words {
		v.blob = append(v.blob, w...)
		v.offs = append(v.offs, int64(len(v.blob)))
	}
	size := indexSize(len(words))
	v.index = make([]int32, size)
	mask := uint64(size - 1)
	for i := range words {
		s := Hash(v.Word(i)) & mask
		for v.index[s] != 0 {
			s = (s + 1) & mask
		}
		v.index[s] = int32(i + 1)
	}
	return v
}

// indexSize is the index table size for n words: a power of two at least
// twice n, so probe chains stay short and an empty slot always exists.
func indexSize(n int) int {
	if n < 4 {
		return 8
	}
	return 1 << bits.Len(uint(2*n-1))
}

// Len is the number of known words, V.
func (v *Vocab) Len() int { return len(v.offs) - 1 }

// Buckets is the number of shared rows for unknown words, B.
func (v *Vocab) Buckets() int { return v.buckets }

// Word returns known word i (row i+1). The slice aliases the model.
//
// Opening a file does not read every offset (that would make opening grow
// with the vocabulary); Verify does. So Word checks its own two offsets and
// returns nil for a word whose offsets a crafted file got wrong, which
// then simply never matches a token.
func (v *Vocab) Word(i int) []byte {
	a, b := v.offs[i], v.offs[i+1]
	if a < 0 || b < a || b > int64(len(v.blob)) {
		return nil
	}
	return v.blob[a:b:b]
}

// Lookup returns the word index of tok, or -1 when tok is unknown.
func (v *Vocab) Lookup(tok []byte) int { return v.lookup(tok, Hash(tok)) }

// lookup is Lookup with tok's Hash h already computed.
func (v *Vocab) lookup(tok []byte, h uint64) int {
	mask := uint64(len(v.index) - 1)
	s := h & mask
	for range v.index { // bounded: a crafted index may have no empty slot
		e := v.index[s]
		if e == 0 {
			return -1
		}
		// Entries are not all checked at open (see Word): skip a bad one.
		if i := int(e - 1); e > 0 && i < v.Len() && bytes.Equal(v.Word(i), tok) {
			return i
		}
		s = (s + 1) & mask
	}
	return -1
}

// Row returns the embedding row of tok: its own row when known, else its
// bucket's.
func (v *Vocab) Row(tok []byte) int32 {
	// One hash picks both the index slot and, for an unknown word, the
	// bucket.
	h := Hash(tok)
	if i := v.lookup(tok, h); i >= 0 {
		return int32(i + 1)
	}
	return int32(1 + v.Len() + int(h%uint64(v.buckets)))
}

// tensors returns the vocabulary's three tensors' raw little-endian bytes.
func (v *Vocab) tensors() (blob, offs, index []byte) {
	offs = make([]byte, 8*len(v.offs))
	for i, o := range v.offs {
		binary.LittleEndian.PutUint64(offs[8*i:], uint64(o))
	}
	index = make([]byte, 4*len(v.index))
	for i, e := range v.index {
		binary.LittleEndian.PutUint32(index[4*i:], uint32(e))
	}
	return v.blob, offs, index
}
