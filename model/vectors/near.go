package vectors

import (
	"errors"
	"fmt"
	"math"
	"slices"
)

// ErrUnknownWord is returned by Nearest for a word the set does not hold.
var ErrUnknownWord = errors.New("vectors: word not in the set")

// Neighbour is a word and its cosine similarity to a query.
type Neighbour struct {
	Word       string
	Similarity float64
}

// Nearest returns the k words most similar to word by cosine similarity,
// most similar first (ties in set order), leaving out word itself. A zero
// vector has similarity 0 to everything. It reads every vector: O(Len·Dim).
func (s *Set) Nearest(word string, k int) ([]Neighbour, error) {
	q := slices.Index(s.Words, word)
	if q < 0 {
		return nil, fmt.Errorf("%w: %q", ErrUnknownWord, word)
	}
	return s.NearestTo(s.Vec(q), k, q), nil
}

// NearestTo returns the k words whose vectors are most similar to v by
// cosine similarity, most similar first, leaving out word number skip
// (pass -1 to keep all).
func (s *Set) NearestTo(v []float32, k int, skip int) []Neighbour {
	qn := norm(v)
	type scored struct {
		i   int
		sim float64
	}
	all := make([]scored, 0, s.Len())
	for i := range s.Len() {
		if i == skip {
			continue
		}
		x := s.Vec(i)
		var dot float64
		for j, a := range v {
			dot += float64(a) * float64(x[j])
		}
		sim := 0.0
		if n := qn * norm(x); n > 0 {
			sim = dot / n
		}
		all = append(all, scored{i, sim})
	}
	slices.SortStableFunc(all, func(a, b scored) int {
		switch {
		case a.sim > b.sim:
			return -1
		case a.sim < b.sim:
			return 1
		}
		return 0
	})
	out := make([]Neighbour, 0, min(k, len(all)))
	for _, x := range all[:min(k, len(all))] {
		out = append(out, Neighbour{s.Words[x.i], x.sim})
	}
	return out
}

func norm(v []float32) float64 {
	var s float64
	for _, x := range v {
		s += float64(x) * float64(x)
	}
	return math.Sqrt(s)
}
