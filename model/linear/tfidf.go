package linear

import (
	"cmp"
	"math"
	"slices"
)

// Entry is one non-zero feature of a text's tf-idf vector.
type Entry struct {
	Feature int32
	Value   float64
}

// Tokens is a text's tokens as the project's tokenizer hands them out
// (token.Tokens has this method set), read without copying.
type Tokens interface {
	Len() int
	At(i int) []byte
}

// TfIdf appends to dst[:0] the tf-idf vector of tokens, in increasing
// feature order, and returns it. It is scikit-learn's default
// TfidfVectorizer (norm='l2', use_idf=True, smooth_idf=True,
// sublinear_tf=False; its user guide, "Tf–idf term weighting"): each
// n-gram's raw count in the text times its idf, the vector then divided by
// its Euclidean norm. N-grams outside the vocabulary are dropped; a text
// with none gives an empty vector. With a dst of enough capacity it does
// not allocate.
func (v *Vocabulary) TfIdf(dst []Entry, tokens []string) []Entry {
	return tfidf[string](v, dst[:0], strs(tokens))
}

// TfIdfOf is TfIdf for tokens read through the Tokens interface.
func (v *Vocabulary) TfIdfOf(dst []Entry, tokens Tokens) []Entry {
	return tfidf[[]byte](v, dst[:0], tokens)
}

// source is what tfidf reads tokens from; a type parameter rather than a
// func value, so that no closure escapes and scoring stays allocation-free.
type source[S ~string | ~[]byte] interface {
	Len() int
	At(i int) S
}

type strs []string

func (s strs) Len() int        { return len(s) }
func (s strs) At(i int) string { return s[i] }

func tfidf[S ~string | ~[]byte, T source[S]](v *Vocabulary, dst []Entry, src T) []Entry {
	var prev S
	var hprev uint64
	for i := range src.Len() {
		t := src.At(i)
		h := hashMore(fnvOffset, t)
		if f := lookup(v, h, t, t[:0], false); f >= 0 {
			dst = append(dst, Entry{Feature: int32(f), Value: 1})
		}
		if i > 0 {
			// The bigram's hash continues the previous token's with the
			// separator byte and this token.
			hb := hashMore((hprev^uint64(Sep))*fnvPrime, t)
			if f := lookup(v, hb, prev, t, true); f >= 0 {
				dst = append(dst, Entry{Feature: int32(f), Value: 1})
			}
		}
		prev, hprev = t, h
	}
	if len(dst) == 0 {
		return dst
	}
	slices.SortFunc(dst, func(a, b Entry) int { return cmp.Compare(a.Feature, b.Feature) })
	// Merge repeats into counts, then weigh and normalise.
	k := 0
	for _, e := range dst[1:] {
		if e.Feature == dst[k].Feature {
			dst[k].Value++
		} else {
			k++
			dst[k] = e
		}
	}
	dst = dst[:k+1]
	var ss float64
	for j := range dst {
		dst[j].Value *= float64(v.IDF[dst[j].Feature])
		ss += dst[j].Value * dst[j].Value
	}
	norm := math.Sqrt(ss)
	for j := range dst {
		dst[j].Value /= norm
	}
	return dst
}
