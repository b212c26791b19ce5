package stream

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"strings"
	"testing"
)

// cutAll runs the cutter over data fed in chunks of the given sizes (cycled)
// and returns the blocks' bytes in sequence.
func cutAll(t testing.TB, data []byte, sizes []int, blockSize, maxLine int) [][]byte {
	cfg, err := newConfig(Options{Tagger: nullTagger{}, BlockSize: blockSize, MaxLine: maxLine})
	if err != nil {
		t.Fatal(err)
	}
	chunks := make(chan chunk)
	pool := make(chan []byte, len(data)+2) // every chunk comes back here
	free := make(chan *block, 4)
	for range cap(free) {
		free <- &block{lastNL: -1}
	}
	work := make(chan *block, 4)
	never := make(chan struct{})
	c := &cutter{cfg: cfg, chunks: chunks, chunkPool: pool, free: free, work: work, stop: never, abort: never}
	go c.run()
	go func() {
		for i, k := 0, 0; i < len(data); k++ {
			n := min(max(sizes[k%len(sizes)], 1), len(data)-i)
			chunks <- chunk{buf: bytes.Clone(data[i : i+n])}
			i += n
		}
		chunks <- chunk{eof: true}
		close(chunks)
	}()
	var out [][]byte
	for b := range work {
		out = append(out, bytes.Clone(b.in))
		if !b.raw && len(b.in) > 0 && b.in[len(b.in)-1] != '\n' {
			t.Fatalf("block %d does not end a line: %q", b.seq, b.in)
		}
		b.reset()
		free <- b
	}
	return out
}

func FuzzLines(f *testing.F) {
	f.Add([]byte("a\nb\r\nc"), 3, 1, 8)
	f.Add([]byte("\n\n\r\r\n"), 1, 2, 4)
	f.Add([]byte(strings.Repeat("long line ", 50)+"\nshort\n"), 7, 16, 64)
	f.Fuzz(func(t *testing.T, data []byte, s1, s2, blockSize int) {
		blockSize = 1 + abs(blockSize)%256
		maxLine := blockSize * 2
		blocks := cutAll(t, data, []int{abs(s1)%300 + 1, abs(s2)%300 + 1}, blockSize, maxLine)
		joined := bytes.Join(blocks, nil)
		want := data
		if len(data) > 0 && data[len(data)-1] != '\n' {
			want = append(bytes.Clone(data), '\n')
		}
		if !bytes.Equal(joined, want) {
			t.Fatalf("blocks rejoined %q, want %q", joined, want)
		}
		// Records, rejoined with their terminators, are the input again.
		var back []byte
		for i := 0; i < len(joined); {
			line, term, next := nextLine(joined, i)
			if bytes.IndexByte(line, '\n') >= 0 || bytes.HasSuffix(line, []byte("\r")) && len(term) == 1 {
				t.Fatalf("bad record %q %q", line, term)
			}
			back = append(append(back, line...), term...)
			i = next
		}
		if !bytes.Equal(back, joined) {
			t.Fatalf("records rejoined %q, want %q", back, joined)
		}
	})
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// Example shows the library: tag JSON Lines and text from a reader.
func Example() {
	in := strings.NewReader(`{"id":7,"text":"storm and swell at Skerrow"}` + "\n" + "the ferry ticket office\n")
	st, err := Run(context.Background(), Options{Tagger: exampleTagger{}}, nil, in, exampleOut{})
	fmt.Println(st.Records, st.Written, err)
	// Output:
	// {"id":7,"text":"storm and swell at Skerrow","tag":"weather","confidence":0.9000}
	// crossing	0.9000	the ferry ticket office
	// 2 2 <nil>
}

// exampleTagger says "weather" for texts that mention a storm.
type exampleTagger struct{}

func (exampleTagger) Labels() []string  { return []string{"crossing", "weather"} }
func (exampleTagger) NewScorer() Scorer { return &exampleScorer{} }

type exampleScorer struct{ p [2]float32 }

func (s *exampleScorer) Score(text []byte) []float32 {
	s.p = [2]float32{0.9, 0.1}
	if bytes.Contains(text, []byte("storm")) {
		s.p = [2]float32{0.1, 0.9}
	}
	return s.p[:]
}

type exampleOut struct{}

func (exampleOut) Write(p []byte) (int, error) { return io.MultiWriter(stdout{}).Write(p) }

type stdout struct{}

func (stdout) Write(p []byte) (int, error) { fmt.Print(string(p)); return len(p), nil }
