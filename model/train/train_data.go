package train

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"

	"convtag/model/token"
)

// CountTokens adds one to counts for every token of text, as tok cuts it.
// ts is scratch.
func CountTokens(counts map[string]int, tok *token.Tokenizer, ts *token.Tokens, text []byte) {
	tok.Tokenize(ts, text)
	for i := range ts.Len() {
		counts[string(ts.At(i))]++
	}
}

// BuildWords returns the words of counts seen at least minCount times,
// most frequent first and equal counts in byte order, at most maxWords of
// them (0: no cap). Rarer words are left to the hash buckets, where they
// share rows and still get trained.
func BuildWords(counts map[string]int, minCount, maxWords int) []string {
	var words []string
	for w, n := range counts {
		if n >= minCount && w != "" {
			words = append(words, w)
		}
	}
	slices.SortFunc(words, func(a, b string) int {
		if counts[a] != counts[b] {
			return counts[b] - counts[a]
		}
		return strings.Compare(a, b)
	})
	if maxWords > 0 && len(words) > maxWords {
		words = words[:maxWords]
	}
	return words
}

// StratifiedSplit puts about frac of each label's items (labels[i] is item
// i's label) into dev, chosen at random with the seed, and the rest into
// train; both lists are in increasing order. A label with at least two items
// keeps at least one on each side when frac > 0.
func StratifiedSplit(labels []int, frac float64, seed uint64) (train, dev []int) {
	byLabel := groupByLabel(labels)
	rng := rand.New(rand.NewPCG(seed, 0x73706c6974)) // "split"
	isDev := make([]bool, len(labels))
	for _, items := range byLabel {
		rng.Shuffle(len(items), func(i, j int) { items[i], items[j] = items[j], items[i] })
		k := int(math.Round(frac * float64(len(items))))
		if frac > 0 && len(items) >= 2 {
			k = min(max(k, 1), len(items)-1)
		}
		for _, i := range items[:k] {
			isDev[i] = true
		}
	}
	for i, d := range isDev {
		if d {
			dev = append(dev, i)
		} else {
			train = append(train, i)
		}
	}
	return train, dev
}

// StratifiedFolds assigns every item a fold in 0..k-1 so that each label's
// items are spread evenly over the folds, at random with the seed.
func StratifiedFolds(labels []int, k int, seed uint64) []int {
	fold := make([]int, len(labels))
	rng := rand.New(rand.NewPCG(seed, 0x666f6c64)) // "fold"
	next := 0
	for _, items := range groupByLabel(labels) {
		rng.Shuffle(len(items), func(i, j int) { items[i], items[j] = items[j], items[i] })
		for _, i := range items {
			fold[i] = next % k
			next++
		}
	}
	return fold
}

// groupByLabel lists item indices per label, labels in increasing order.
func groupByLabel(labels []int) [][]int {
	n := 0
	for _, l := range labels {
		n = max(n, l+1)
	}
	g := make([][]int, n)
	for i, l := range labels {
		g[l] = append(g[l], i)
	}
	return g
}
