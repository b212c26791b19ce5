package linear

import (
	"bytes"
	"cmp"
	"errors"
	"fmt"
	"math"
	"math/bits"
	"slices"
)

// Sep joins the two tokens of a bigram. Tokens never contain it (the
// project's tokenizer splits at white space), and it is the separator
// scikit-learn's word n-grams use, so feature strings read the same in
// both. A token that does contain a space is refused by the fitting
// functions; at scoring time it is looked up as it is.
const Sep = ' '

// Vocabulary is the feature space: the distinct unigrams and bigrams of the
// training texts in increasing byte order, each with its inverse document
// frequency. Feature i is the i-th n-gram.
//
// The fields are the arrays a model file stores (safetensors tensors): the
// n-grams as one blob with offsets, a prebuilt open-addressing hash index
// and the idf values, so a mapped file needs no parsing or building at
// open. They are read-only after construction; a Vocabulary is safe for
// concurrent use.
type Vocabulary struct {
	// Grams holds the n-grams back to back; n-gram i is
	// Grams[Offsets[i]:Offsets[i+1]], a bigram's two tokens joined by Sep.
	Grams []byte
	// Offsets has Len()+1 non-decreasing entries, the first 0 and the last
	// len(Grams).
	Offsets []int64
	// Index is a power-of-two table of feature index + 1 (0 is an empty
	// slot), placed at Hash(n-gram) mod len(Index) with linear probing. It
	// has at least twice as many slots as features, so a probe always
	// reaches an empty slot.
	Index []int32
	// IDF is the inverse document frequency of each feature.
	IDF []float32
}

// Errors the package's functions wrap.
var (
	ErrInput  = errors.New("linear: bad input")
	ErrArrays = errors.New("linear: inconsistent arrays")
)

// Hash is the index's fixed hash: 64-bit FNV-1a over the n-gram's bytes (a
// bigram's bytes include its Sep). It is the hash of the model package's
// vocabulary, so a file has one hash function. It must never change: model
// files depend on it.
func Hash(gram []byte) uint64 { return hashMore(fnvOffset, gram) }

const (
	fnvOffset = 14695981039346656037
	fnvPrime  = 1099511628211
)

func hashMore[S ~string | ~[]byte](h uint64, s S) uint64 {
	for i := 0; i < len(s); i++ {
		h ^= uint64(s[i])
		h *= fnvPrime
	}
	return h
}

// Len is the number of features.
func (v *Vocabulary) Len() int { return len(v.Offsets) - 1 }

// Gram returns n-gram i as a new string; a range the arrays got wrong
// gives "".
func (v *Vocabulary) Gram(i int) string {
	a, b := v.Offsets[i], v.Offsets[i+1]
	if a < 0 || a > b || b > int64(len(v.Grams)) {
		return ""
	}
	return string(v.Grams[a:b])
}

// Find returns the feature index of gram, or -1.
func (v *Vocabulary) Find(gram string) int {
	return lookup(v, hashMore(fnvOffset, gram), gram, "", false)
}

// lookup finds the unigram a or, if bigram, the n-gram a Sep b, whose hash
// is h. It checks every offset it reads, so arrays a crafted file got wrong
// can make a lookup miss but never read out of range.
func lookup[S ~string | ~[]byte](v *Vocabulary, h uint64, a, b S, bigram bool) int {
	if len(v.Index) == 0 {
		return -1
	}
	mask := uint64(len(v.Index) - 1)
	n := int64(len(a))
	if bigram {
		n += 1 + int64(len(b))
	}
	for s, probes := h&mask, 0; probes < len(v.Index); s, probes = (s+1)&mask, probes+1 {
		e := v.Index[s]
		if e == 0 {
			return -1
		}
		i := int(e - 1)
		if i >= v.Len() {
			continue
		}
		lo, hi := v.Offsets[i], v.Offsets[i+1]
		if lo < 0 || hi > int64(len(v.Grams)) || hi-lo != n {
			continue
		}
		g := v.Grams[lo:hi]
		if !equal(g[:len(a)], a) {
			continue
		}
		if bigram && (g[len(a)] != Sep || !equal(g[len(a)+1:], b)) {
			continue
		}
		return i
	}
	return -1
}

func equal[S ~string | ~[]byte](g []byte, s S) bool {
	for i := range g {
		if g[i] != s[i] {
			return false
		}
	}
	return true
}

// indexSize is the index size for n features: a power of two at least
// twice n, so probe chains stay short and an empty slot always exists.
func indexSize(n int) int {
	if n < 4 {
		return 8
	}
	return 1 << bits.Len(uint(2*n-1))
}

// BuildVocabulary collects the unigrams and bigrams of docs (every n-gram
// seen in at least one document) and their inverse document frequencies.
// With maxFeatures > 0 only the maxFeatures n-grams with the most
// occurrences over all documents are kept; on a tie at the cut the n-gram
// first in byte order wins (scikit-learn's max_features leaves the order
// of ties unspecified).
//
// The idf is scikit-learn's default (TfidfVectorizer with smooth_idf=True,
// see its user guide, "Tf–idf term weighting"):
//
//	idf(t) = ln((1 + n) / (1 + df(t))) + 1
//
// with n the number of documents and df(t) the number of documents that
// contain t, computed before any feature is cut.
func BuildVocabulary(docs [][]string, maxFeatures int) (*Vocabulary, error) {
	type stat struct{ df, tf, last int }
	stats := map[string]*stat{}
	see := func(g string, d int) {
		s := stats[g]
		if s == nil {
			s = &stat{last: -1}
			stats[g] = s
		}
		s.tf++
		if s.last != d {
			s.df++
			s.last = d
		}
	}
	for d, toks := range docs {
		for i, t := range toks {
			if t == "" || bytes.IndexByte([]byte(t), Sep) >= 0 {
				return nil, fmt.Errorf("%w: document %d token %d: %q is empty or holds the bigram separator", ErrInput, d, i, t)
			}
			see(t, d)
			if i > 0 {
				see(toks[i-1]+string(Sep)+t, d)
			}
		}
	}
	grams := make([]string, 0, len(stats))
	for g := range stats {
		grams = append(grams, g)
	}
	slices.Sort(grams)
	if maxFeatures > 0 && len(grams) > maxFeatures {
		slices.SortStableFunc(grams, func(a, b string) int { return cmp.Compare(stats[b].tf, stats[a].tf) })
		grams = grams[:maxFeatures]
		slices.Sort(grams)
	}
	v := &Vocabulary{Offsets: make([]int64, 1, len(grams)+1), IDF: make([]float32, len(grams))}
	n := float64(len(docs))
	for i, g := range grams {
		v.Grams = append(v.Grams, g...)
		v.Offsets = append(v.Offsets, int64(len(v.Grams)))
		v.IDF[i] = float32(math.Log((1+n)/(1+float64(stats[g].df))) + 1)
	}
	v.Index = v.buildIndex()
	return v, nil
}

func (v *Vocabulary) buildIndex() []int32 {
	idx := make([]int32, indexSize(v.Len()))
	mask := uint64(len(idx) - 1)
	for i := range v.Len() {
		s := Hash(v.Grams[v.Offsets[i]:v.Offsets[i+1]]) & mask
		for idx[s] != 0 {
			s = (s + 1) & mask
		}
		idx[s] = int32(i + 1)
	}
	return idx
}

// check is the O(1) shape check a model file's open can afford.
func (v *Vocabulary) check() error {
	f := len(v.Offsets) - 1
	switch {
	case f < 0:
		return fmt.Errorf("%w: no offsets", ErrArrays)
	case f > math.MaxInt32-1:
		return fmt.Errorf("%w: %d features", ErrArrays, f)
	case len(v.IDF) != f:
		return fmt.Errorf("%w: %d idf values for %d features", ErrArrays, len(v.IDF), f)
	case len(v.Index) < 2*f || len(v.Index)&(len(v.Index)-1) != 0:
		return fmt.Errorf("%w: index of %d slots for %d features", ErrArrays, len(v.Index), f)
	}
	return nil
}

// Verify runs the O(features) checks that opening a file leaves out: the
// offsets, the n-grams' strict byte order, finite positive idf values, and
// an index equal to the one the n-grams build.
func (v *Vocabulary) Verify() error {
	if err := v.check(); err != nil {
		return err
	}
	if v.Offsets[0] != 0 || v.Offsets[v.Len()] != int64(len(v.Grams)) {
		return fmt.Errorf("%w: offsets do not span the n-grams", ErrArrays)
	}
	for i := range v.Len() {
		a, b := v.Offsets[i], v.Offsets[i+1]
		if b <= a {
			return fmt.Errorf("%w: n-gram %d: offsets %d, %d", ErrArrays, i, a, b)
		}
		if i > 0 && bytes.Compare(v.Grams[v.Offsets[i-1]:a], v.Grams[a:b]) >= 0 {
			return fmt.Errorf("%w: n-gram %d out of order", ErrArrays, i)
		}
		if x := float64(v.IDF[i]); !(x >= 1) || math.IsInf(x, 0) {
			return fmt.Errorf("%w: n-gram %d: idf %g", ErrArrays, i, x)
		}
	}
	if !slices.Equal(v.Index, v.buildIndex()) {
		return fmt.Errorf("%w: index differs from the one the n-grams build", ErrArrays)
	}
	return nil
}
