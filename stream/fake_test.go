package stream

import (
	"bytes"
	"context"
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"testing"
	"time"
)

// keywordTagger is a Tagger for tests: it scores by counting keywords, so
// the expected tag of an invented sentence is obvious. With delay set, each
// Score sleeps up to delay at random, to shuffle the order in which workers
// finish.
type keywordTagger struct {
	labels []string
	words  [][]string // per label
	delay  time.Duration
	mu     sync.Mutex
	seed   uint64
}

func newKeywordTagger() *keywordTagger {
	return &keywordTagger{
		labels: []string{"crossing", "weather", "other"},
		words: [][]string{
			{"ferry", "harbour", "ticket", "deck", "crossing"},
			{"storm", "wind", "fog", "rain", "swell"},
			{},
		},
	}
}

func (k *keywordTagger) Labels() []string { return k.labels }

func (k *keywordTagger) NewScorer() Scorer {
	k.mu.Lock()
	k.seed++
	s := k.seed
	k.mu.Unlock()
	return &keywordScorer{k: k, p: make([]float32, len(k.labels)), rng: rand.New(rand.NewPCG(s, 7))}
}

type keywordScorer struct {
	k   *keywordTagger
	p   []float32
	rng *rand.Rand
	low []byte
}

func (s *keywordScorer) Score(text []byte) []float32 {
	if s.k.delay > 0 && s.rng.IntN(64) == 0 {
		time.Sleep(time.Duration(s.rng.Int64N(int64(s.k.delay))))
	}
	s.low = s.low[:0]
	for _, c := range text {
		if c >= 'A' && c <= 'Z' {
			c += 'a' - 'A'
		}
		s.low = append(s.low, c)
	}
	lower := s.low
	sum := 0.0
	for i, ws := range s.k.words {
		n := 0.5 // "other" wins ties with nothing found
		if len(ws) > 0 {
			n = 0
		}
		for _, w := range ws {
			n += float64(bytes.Count(lower, []byte(w)))
		}
		e := math.Exp(n)
		s.p[i] = float32(e)
		sum += e
	}
	for i := range s.p {
		s.p[i] = float32(float64(s.p[i]) / sum)
	}
	return s.p
}

// runString runs the pipeline over input given as standard input.
func runString(t testing.TB, opts Options, input string) (string, Stats, []error) {
	t.Helper()
	if opts.Tagger == nil {
		opts.Tagger = newKeywordTagger()
	}
	var errs []error
	opts.OnError = func(err error) { errs = append(errs, err) }
	var out bytes.Buffer
	st, err := Run(context.Background(), opts, nil, onlyReader{strings.NewReader(input)}, &out)
	if err != nil {
		errs = append(errs, err)
	}
	return out.String(), st, errs
}

// onlyReader hides every method but Read, as a pipe would.
type onlyReader struct {
	r interface{ Read([]byte) (int, error) }
}

func (o onlyReader) Read(p []byte) (int, error) { return o.r.Read(p) }
