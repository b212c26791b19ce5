package stream

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"strings"
	"sync/atomic"
	"testing"
	"time"
)

// releaseTagger is a keywordTagger with labels of its own that counts its
// releases and notes how many records had been written when it was
// released. A Score after the release fails the test: that is the use of
// an unmapped model the reference count exists to prevent.
type releaseTagger struct {
	*keywordTagger
	t        *testing.T
	name     string
	written  *atomic.Int64 // records written so far, from Options.Progress
	releases atomic.Int32
	at       atomic.Int64 // written when released
}

func newReleaseTagger(t *testing.T, i int, written *atomic.Int64, delay time.Duration) *releaseTagger {
	k := newKeywordTagger()
	k.delay = delay
	k.labels = []string{fmt.Sprintf("crossing%d", i), fmt.Sprintf("weather%d", i), fmt.Sprintf("other%d", i)}
	return &releaseTagger{keywordTagger: k, t: t, name: fmt.Sprint(i), written: written}
}

func (r *releaseTagger) Release() {
	r.at.Store(r.written.Load())
	r.releases.Add(1)
}

func (r *releaseTagger) NewScorer() Scorer {
	return releaseScorer{r, r.keywordTagger.NewScorer()}
}

type releaseScorer struct {
	r     *releaseTagger
	inner Scorer
}

func (s releaseScorer) Score(text []byte) []float32 {
	if s.r.releases.Load() > 0 {
		s.r.t.Errorf("tagger %s scored %q after its release", s.r.name, text)
	}
	return s.inner.Score(text)
}

// Each Tagger given to Switch.Set is released exactly once, after the last
// block tagged with it has been written and never before; the current one
// and Options.Tagger are not released. "quiet" waits for the output before
// each Set, so the release must happen within Set; "busy" sets while blocks
// are in flight on 4 workers with random scoring delays.
func TestSwitchReleasesReplacedTaggers(t *testing.T) {
	const sets, perSet = 12, 300
	for _, tc := range []struct {
		name  string
		jobs  int
		quiet bool
		delay time.Duration
	}{
		{"quiet j1", 1, true, 0},
		{"quiet j4", 4, true, 0},
		{"busy j4", 4, false, 200 * time.Microsecond},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var written atomic.Int64
			initial := newReleaseTagger(t, 99, &written, 0)
			taggers := make([]*releaseTagger, sets)
			for i := range taggers {
				taggers[i] = newReleaseTagger(t, i, &written, tc.delay)
			}
			sw := new(Switch)
			pr, pw := io.Pipe()
			var out bytes.Buffer
			done := make(chan error, 1)
			go func() {
				_, err := Run(context.Background(), Options{Tagger: initial, Switch: sw, Jobs: tc.jobs, BlockSize: 4096, Format: InputText,
					Progress: func(_, records int64) { written.Store(records) }}, nil, pr, &out)
				done <- err
			}()
			waitWritten := func(n int64) {
				for deadline := time.Now().Add(20 * time.Second); written.Load() < n; time.Sleep(time.Millisecond) {
					if time.Now().After(deadline) {
						t.Fatalf("%d records written, want %d", written.Load(), n)
					}
				}
			}
			line := 0
			for i, tg := range taggers {
				sw.Set(tg)
				if tc.quiet && i > 0 {
					if n := taggers[i-1].releases.Load(); n != 1 {
						t.Fatalf("tagger %d: %d releases right after it was replaced with nothing in flight, want 1", i-1, n)
					}
				}
				for range perSet {
					fmt.Fprintf(pw, "ferry in the fog %d\n", line)
					line++
				}
				if tc.quiet {
					waitWritten(int64(line))
				}
			}
			pw.Close()
			if err := <-done; err != nil {
				t.Fatal(err)
			}
			// The last line tagged by each tagger, from its labels.
			last := map[string]int{}
			lines := strings.Split(strings.TrimSuffix(out.String(), "\n"), "\n")
			if len(lines) != line {
				t.Fatalf("%d lines out, want %d", len(lines), line)
			}
			for n, l := range lines {
				tag, _, _ := strings.Cut(l, "\t")
				last[strings.TrimLeft(tag, "abcdefghijklmnopqrstuvwxyz")] = n
			}
			if n := initial.releases.Load(); n != 0 {
				t.Errorf("Options.Tagger released %d times; it is the caller's", n)
			}
			for i, tg := range taggers {
				want := int32(1)
				if i == len(taggers)-1 {
					want = 0 // still the Switch's current Tagger
				}
				if n := tg.releases.Load(); n != want {
					t.Errorf("tagger %d: %d releases, want %d", i, n, want)
					continue
				}
				if l, ok := last[tg.name]; ok && want == 1 && tg.at.Load() < int64(l+1) {
					t.Errorf("tagger %d released with %d records written, before its last record (line %d)", i, tg.at.Load(), l+1)
				}
			}
		})
	}
}
