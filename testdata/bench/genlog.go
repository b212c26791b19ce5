// Command genlog writes an invented chat log for the end-to-end benchmark.
//
// It lives under testdata/, so `go build ./...`, `go vet ./...` and
// `go test ./...` never see it; run it by path:
//
//	go run ./testdata/bench/genlog.go -n 1000000 -seed 1 > log.jsonl
//	go run ./testdata/bench/genlog.go -labelled -vocab 50000 -n 300000 -seed 2 > train.jsonl
//	go run ./testdata/bench/genlog.go -words -vocab 50000 > words.txt
//
// Plain mode writes one JSON object a line with ts, room, user, text and a
// nested meta object. With -labelled it writes {"text": ..., "label": ...}
// records with five labels, for training a benchmark model.
//
// Texts have 5–40 words (uniform). Words are drawn from a vocabulary of
// -vocab invented words with a Zipf-like spread: word of rank k is chosen
// with probability proportional to 1/k^s (-zipf, default 1.1; natural
// language is near s = 1, Zipf's law, so 1.1 is common practice for
// synthetic text). The vocabulary itself does not depend on -seed or -vocab:
// word k is always the same string, so the words of a small-vocabulary log are
// the most frequent words of a large-vocabulary training set.
//
// Output is a pure function of the flags (own PRNG and sampler, no
// math/rand), so the same flags give the same bytes with any Go version.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"time"
)

// Labels of -labelled mode.
var labels = []string{"schedule", "tickets", "lost-and-found", "praise", "spam"}

const (
	minWords = 5
	maxWords = 40
	// vocabSeed fixes the word list independently of -seed.
	vocabSeed = 0x5eed_f3a7_0bad_c0de
	// cueShare is the chance, in -labelled mode, that a word is drawn from
	// the label's own cue words instead of the shared vocabulary.
	cueShare = 0.25
	// cueWords is how many words each label owns (taken round-robin from
	// ranks 200 and up, so cue words are neither the commonest nor rare).
	cueWords = 300
)

func main() {
	if err := run(os.Args[1:], os.Stdout, os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "genlog:", err)
		os.Exit(2)
	}
}

func run(args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("genlog", flag.ContinueOnError)
	fs.SetOutput(stderr)
	n := fs.Int("n", 1_000_000, "number of records")
	seed := fs.Uint64("seed", 1, "seed for the records (the word list does not depend on it)")
	vocab := fs.Int("vocab", 5000, "number of distinct words")
	s := fs.Float64("zipf", 1.1, "Zipf exponent s (> 0)")
	labelled := fs.Bool("labelled", false, `write {"text","label"} training records instead of a chat log`)
	words := fs.Bool("words", false, "write the vocabulary, one word a line, most frequent first")
	if err := fs.Parse(args); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return fmt.Errorf("unexpected argument %q; try: genlog -n 1000 > log.jsonl", fs.Arg(0))
	case *n < 0:
		return fmt.Errorf("-n %d: must be >= 0", *n)
	case *vocab < cueWords*len(labels)+200 || *vocab > 1_000_000:
		return fmt.Errorf("-vocab %d: must be in %d..1000000", *vocab, cueWords*len(labels)+200)
	case !(*s > 0) || *s > 10:
		return fmt.Errorf("-zipf %v: must be in (0, 10]", *s)
	}
	w := bufio.NewWriterSize(stdout, 1<<20)
	if *words {
		for _, word := range makeWords(*vocab) {
			w.Write(word)
			w.WriteByte('\n')
		}
		return w.Flush()
	}
	g := newGen(*seed, *vocab, *s)
	var line []byte
	for i := 0; i < *n; i++ {
		if *labelled {
			line = g.labelledRecord(line[:0])
		} else {
			line = g.chatRecord(line[:0])
		}
		if _, err := w.Write(line); err != nil {
			return err
		}
	}
	return w.Flush()
}

// rng is SplitMix64 (Steele, Lea and Flood, "Fast splittable pseudorandom
// number generators", OOPSLA 2014): tiny, fast and fully specified.
type rng struct{ x uint64 }

func (r *rng) next() uint64 {
	r.x += 0x9e3779b97f4a7c15
	z := r.x
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// float returns a uniform value in [0, 1).
func (r *rng) float() float64 { return float64(r.next()>>11) / (1 << 53) }

// intn returns a uniform value in [0, n); the modulo bias is negligible
// for the small n used here.
func (r *rng) intn(n int) int { return int(r.next() % uint64(n)) }

// zipf samples ranks 0..len(cdf)-1 with P(k) ∝ 1/(k+1)^s by binary search
// in the cumulative table.
type zipf struct{ cdf []float64 }

func newZipf(n int, s float64) zipf {
	cdf := make([]float64, n)
	sum := 0.0
	for k := range n {
		sum += math.Pow(float64(k+1), -s)
		cdf[k] = sum
	}
	for k := range cdf {
		cdf[k] /= sum
	}
	return zipf{cdf}
}

func (z zipf) sample(r *rng) int {
	u := r.float()
	k := sort.SearchFloat64s(z.cdf, u)
	return min(k, len(z.cdf)-1)
}

type gen struct {
	r      rng
	words  [][]byte
	zipf   zipf
	cues   [][]int // per label, ranks of its cue words
	cueZ   zipf
	users  [][]byte
	userZ  zipf
	rooms  []string
	roomZ  zipf
	ts     time.Time
	nextID uint64
}

func newGen(seed uint64, vocab int, s float64) *gen {
	g := &gen{r: rng{seed}, words: makeWords(vocab), zipf: newZipf(vocab, s)}
	g.cues = make([][]int, len(labels))
	for i := range cueWords * len(labels) {
		l := i % len(labels)
		g.cues[l] = append(g.cues[l], 200+i)
	}
	g.cueZ = newZipf(cueWords, 1.0)
	ur := rng{vocabSeed ^ 0x75736572}
	seen := map[string]bool{}
	for len(g.users) < 5000 {
		a := g.words[ur.intn(2000)]
		b := g.words[ur.intn(vocab)]
		var u []byte
		switch ur.intn(3) {
		case 0:
			u = fmt.Appendf(nil, "%s_%s", a, b)
		case 1:
			u = fmt.Appendf(nil, "%s%d", a, ur.intn(1000))
		default:
			u = fmt.Appendf(nil, "%s.%s", b, a)
		}
		if !seen[string(u)] {
			seen[string(u)] = true
			g.users = append(g.users, u)
		}
	}
	g.userZ = newZipf(len(g.users), 0.9)
	g.rooms = []string{"help", "crossings", "general", "lost-property", "tickets", "island-news",
		"harbour-north", "harbour-south", "weather", "offtopic", "staff-desk", "night-boats"}
	g.roomZ = newZipf(len(g.rooms), 1.2)
	g.ts = time.Date(2025, 3, 1, 6, 0, 0, 0, time.UTC)
	return g
}

// makeWords returns n distinct invented words, shorter ones at the top ranks
// as in natural language. Word k depends only on k and vocabSeed.
func makeWords(n int) [][]byte {
	onsets := []string{"b", "br", "c", "ch", "d", "dr", "f", "fl", "g", "gl", "gr", "h", "j", "k", "l", "m",
		"n", "p", "pl", "pr", "qu", "r", "s", "sc", "sh", "sk", "sl", "sn", "sp", "st", "t", "th", "tr", "v", "w", "wh", "y", "z"}
	vowels := []string{"a", "e", "i", "o", "u", "a", "e", "o", "ai", "ea", "ee", "oo", "ou", "ie", "oa", "y"}
	codas := []string{"", "", "", "n", "r", "s", "t", "l", "m", "nd", "st", "ck", "ng", "rk", "sh", "ll", "ft", "mp"}
	r := rng{vocabSeed}
	seen := make(map[string]bool, n)
	words := make([][]byte, 0, n)
	var w []byte
	for len(words) < n {
		k := len(words)
		// Length grows with rank, as in natural language: the top ranks
		// are one short syllable, the tail up to four.
		short := k < 150
		maxSyl := 2
		switch {
		case short:
			maxSyl = 1
		case k >= 20000:
			maxSyl = 4
		case k >= 1500:
			maxSyl = 3
		}
		syl := 1 + r.intn(maxSyl)
		w = w[:0]
		for i := range syl {
			if i == 0 || r.intn(4) != 0 {
				w = append(w, onsets[r.intn(len(onsets))]...)
			}
			if short {
				w = append(w, vowels[r.intn(5)]...)
				w = append(w, codas[r.intn(9)]...)
				continue
			}
			w = append(w, vowels[r.intn(len(vowels))]...)
			if i == syl-1 || r.intn(3) == 0 {
				w = append(w, codas[r.intn(len(codas))]...)
			}
		}
		if len(w) < 2 || seen[string(w)] {
			continue
		}
		seen[string(w)] = true
		words = append(words, append([]byte(nil), w...))
	}
	return words
}

// text appends a sentence of 5–40 words. In labelled mode (label >= 0)
// some words are the label's cue words.
func (g *gen) text(b []byte, label int) []byte {
	n := minWords + g.r.intn(maxWords-minWords+1)
	for i := range n {
		if i > 0 {
			if g.r.intn(12) == 0 {
				b = append(b, ',')
			}
			b = append(b, ' ')
		}
		var w []byte
		switch {
		case label >= 0 && g.r.float() < cueShare:
			w = g.words[g.cues[label][g.cueZ.sample(&g.r)]]
		case g.r.intn(40) == 0:
			// Numbers and clock times, as chat has them.
			if g.r.intn(2) == 0 {
				b = strconv.AppendInt(b, int64(g.r.intn(500)), 10)
			} else {
				b = fmt.Appendf(b, "%02d:%02d", g.r.intn(24), 5*g.r.intn(12))
			}
			continue
		default:
			w = g.words[g.zipf.sample(&g.r)]
		}
		if i == 0 {
			b = append(b, w[0]-'a'+'A')
			b = append(b, w[1:]...)
		} else {
			b = append(b, w...)
		}
	}
	switch g.r.intn(6) {
	case 0:
		b = append(b, '?')
	case 1:
		b = append(b, '!')
	default:
		b = append(b, '.')
	}
	return b
}

var clients = []string{"web", "app-android", "app-ios", "kiosk", "bridge"}
var langs = []string{"en", "en", "en", "en", "en", "en", "fr", "de", "nl", "es"}

func (g *gen) chatRecord(b []byte) []byte {
	g.ts = g.ts.Add(time.Duration(g.r.intn(3000)) * time.Millisecond)
	g.nextID++
	b = append(b, `{"ts":"`...)
	b = g.ts.AppendFormat(b, time.RFC3339)
	b = append(b, `","room":"`...)
	b = append(b, g.rooms[g.roomZ.sample(&g.r)]...)
	b = append(b, `","user":"`...)
	b = append(b, g.users[g.userZ.sample(&g.r)]...)
	b = append(b, `","text":"`...)
	b = g.text(b, -1)
	b = append(b, `","meta":{"client":"`...)
	b = append(b, clients[g.r.intn(len(clients))]...)
	b = append(b, `","lang":"`...)
	b = append(b, langs[g.r.intn(len(langs))]...)
	b = append(b, `","msg":`...)
	b = strconv.AppendUint(b, g.nextID, 10)
	b = append(b, "}}\n"...)
	return b
}

func (g *gen) labelledRecord(b []byte) []byte {
	// Skewed like real chat: spam is the rarest tag.
	weights := [...]int{26, 24, 20, 18, 12}
	u, l := g.r.intn(100), 0
	for u >= weights[l] {
		u -= weights[l]
		l++
	}
	b = append(b, `{"text":"`...)
	b = g.text(b, l)
	b = append(b, `","label":"`...)
	b = append(b, labels[l]...)
	b = append(b, "\"}\n"...)
	return b
}
