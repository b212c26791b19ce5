package nb

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// sep joins the two words of a bigram; tokens never contain it.
const sep = "\x1f"

// Model is a fitted classifier. It is read-only after Fit or Decode and safe
// for concurrent use.
//
// Scoring follows the multinomial event model of McCallum and Nigam (1998),
// "A Comparison of Event Models for Naive Bayes Text Classification": a
// class's score is log P(c) + sum over the text's features f of
// log P(f|c), with P(f|c) = (n(f,c) + alpha) / (n(c) + alpha |V|), |V| the
// number of distinct training features; features never seen in training
// are ignored (as scikit-learn's CountVectorizer + MultinomialNB do).
type Model struct {
	labels int
	alpha  float64
	docs   []int            // training documents per label
	total  []int            // feature occurrences per label
	counts map[string][]int // feature -> occurrences per label
	logp   map[string][]float64
	prior  []float64
	unseen []float64 // log P(f|c) for a feature with count 0 in c
}

// Features appends to dst the lowercase unigrams and bigrams of tokens.
func Features(dst []string, tokens []string) []string {
	low := make([]string, len(tokens))
	for i, t := range tokens {
		low[i] = strings.ToLower(t)
	}
	dst = append(dst, low...)
	for i := 1; i < len(low); i++ {
		dst = append(dst, low[i-1]+sep+low[i])
	}
	return dst
}

// Fit counts the features of docs (token lists) with their labels (indices
// below labels) and smooths with alpha (1 is Laplace smoothing).
func Fit(docs [][]string, y []int, labels int, alpha float64) (*Model, error) {
	if len(docs) != len(y) {
		return nil, fmt.Errorf("nb: %d documents, %d labels", len(docs), len(y))
	}
	if labels < 1 || alpha <= 0 {
		return nil, errors.New("nb: need at least one label and alpha > 0")
	}
	m := &Model{labels: labels, alpha: alpha, docs: make([]int, labels), total: make([]int, labels), counts: map[string][]int{}}
	var fs []string
	for i, d := range docs {
		c := y[i]
		if c < 0 || c >= labels {
			return nil, fmt.Errorf("nb: document %d: label %d out of range", i, c)
		}
		m.docs[c]++
		fs = Features(fs[:0], d)
		for _, f := range fs {
			n := m.counts[f]
			if n == nil {
				n = make([]int, labels)
				m.counts[f] = n
			}
			n[c]++
			m.total[c]++
		}
	}
	m.finish()
	return m, nil
}

func (m *Model) finish() {
	v := float64(len(m.counts))
	n := 0
	for _, d := range m.docs {
		n += d
	}
	m.prior = make([]float64, m.labels)
	m.unseen = make([]float64, m.labels)
	for c := range m.labels {
		m.prior[c] = math.Log(float64(m.docs[c]) / float64(max(n, 1)))
		if m.docs[c] == 0 {
			m.prior[c] = math.Inf(-1)
		}
		m.unseen[c] = math.Log(m.alpha / (float64(m.total[c]) + m.alpha*v))
	}
	m.logp = make(map[string][]float64, len(m.counts))
	for f, cnt := range m.counts {
		lp := make([]float64, m.labels)
		for c := range m.labels {
			lp[c] = math.Log((float64(cnt[c]) + m.alpha) / (float64(m.total[c]) + m.alpha*v))
		}
		m.logp[f] = lp
	}
}

// Labels is the number of labels.
func (m *Model) Labels() int { return m.labels }

// Features is the number of distinct training features, |V|.
func (m *Model) Features() int { return len(m.counts) }

// Scores returns the unnormalised log posterior of each label for tokens,
// in a new slice.
func (m *Model) Scores(tokens []string) []float64 {
	s := slices.Clone(m.prior)
	for _, f := range Features(nil, tokens) {
		lp, ok := m.logp[f]
		if !ok {
			continue
		}
		for c := range s {
			s[c] += lp[c]
		}
	}
	return s
}

// Predict returns the label with the highest score (the lowest index on a
// tie).
func (m *Model) Predict(tokens []string) int {
	s := m.Scores(tokens)
	best := 0
	for c, v := range s {
		if v > s[best] {
			best = c
		}
	}
	return best
}

// Encode writes m compactly as text: a header line "nb1 labels alpha",
// a line of document counts per label, then one line per feature (in
// sorted order) with its counts and the feature, tab-separated.
func (m *Model) Encode() []byte {
	var b bytes.Buffer
	fmt.Fprintf(&b, "nb1 %d %s\n", m.labels, strconv.FormatFloat(m.alpha, 'g', -1, 64))
	for c, d := range m.docs {
		if c > 0 {
			b.WriteByte(' ')
		}
		b.WriteString(strconv.Itoa(d))
	}
	b.WriteByte('\n')
	keys := make([]string, 0, len(m.counts))
	for f := range m.counts {
		keys = append(keys, f)
	}
	slices.Sort(keys)
	for _, f := range keys {
		for _, n := range m.counts[f] {
			b.WriteString(strconv.Itoa(n))
			b.WriteByte('\t')
		}
		b.WriteString(f)
		b.WriteByte('\n')
	}
	return b.Bytes()
}

// ErrFormat is the error Decode wraps for a malformed encoding.
var ErrFormat = errors.New("nb: malformed baseline encoding")

// Decode reads what Encode wrote.
func Decode(data []byte) (*Model, error) {
	sc := bufio.NewScanner(bytes.NewReader(data))
	sc.Buffer(nil, 1<<20)
	line := 0
	bad := func(why string) error { return fmt.Errorf("%w: line %d: %s", ErrFormat, line, why) }
	if !sc.Scan() {
		return nil, bad("empty")
	}
	line++
	var labels int
	var alpha float64
	if _, err := fmt.Sscanf(sc.Text(), "nb1 %d %g", &labels, &alpha); err != nil || labels < 1 || labels > 1<<16 || !(alpha > 0) {
		return nil, bad("bad header")
	}
	m := &Model{labels: labels, alpha: alpha, docs: make([]int, labels), total: make([]int, labels), counts: map[string][]int{}}
	if !sc.Scan() {
		return nil, bad("missing document counts")
	}
	line++
	f := strings.Fields(sc.Text())
	if len(f) != labels {
		return nil, bad("wrong number of document counts")
	}
	for c, s := range f {
		n, err := strconv.Atoi(s)
		if err != nil || n < 0 {
			return nil, bad("bad document count")
		}
		m.docs[c] = n
	}
	for sc.Scan() {
		line++
		parts := strings.SplitN(sc.Text(), "\t", labels+1)
		if len(parts) != labels+1 || parts[labels] == "" {
			return nil, bad("bad feature line")
		}
		cnt := make([]int, labels)
		for c := range labels {
			n, err := strconv.Atoi(parts[c])
			if err != nil || n < 0 || n > 1<<40 {
				return nil, bad("bad feature count")
			}
			cnt[c] = n
			m.total[c] += n
		}
		if _, dup := m.counts[parts[labels]]; dup {
			return nil, bad("duplicate feature")
		}
		m.counts[parts[labels]] = cnt
	}
	if err := sc.Err(); err != nil {
		return nil, bad(err.Error())
	}
	m.finish()
	return m, nil
}
