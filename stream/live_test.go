package stream

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"
)

// lineWriter hands each output line, as it arrives, to lines.
type lineWriter struct {
	mu    sync.Mutex
	part  []byte
	lines chan string
}

func (w *lineWriter) Write(p []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	w.part = append(w.part, p...)
	for {
		i := bytes.IndexByte(w.part, '\n')
		if i < 0 {
			break
		}
		w.lines <- string(w.part[:i])
		w.part = w.part[i+1:]
	}
	return len(p), nil
}

// stallGuard ends a test that would otherwise hang. It is a guard against
// a deadlock, not a measure of speed: a correct pipeline answers in
// microseconds, whatever the machine's load.
const stallGuard = 60 * time.Second

// lockstepReader is an input that hands out one line per Read, and before
// handing out the next waits until the output has received the tagged
// record of the one before: it only goes on if each line is written as soon
// as it is tagged, not held back for a fuller block.
type lockstepReader struct {
	lines  []string
	out    <-chan string
	next   int
	got    []string
	failed error
}

var errStalled = errors.New("the last line was not written before more input came")

func (r *lockstepReader) Read(p []byte) (int, error) {
	if r.next > 0 {
		select {
		case l := <-r.out:
			r.got = append(r.got, l)
		case <-time.After(stallGuard):
			r.failed = fmt.Errorf("line %d: %w (waited %v)", r.next, errStalled, stallGuard)
			return 0, r.failed
		}
	}
	if r.next == len(r.lines) {
		return 0, io.EOF
	}
	n := copy(p, r.lines[r.next]) // lines are far shorter than a chunk
	r.next++
	return n, nil
}

// A live stream: each line is tagged and written while the input is idle,
// before any more input arrives, with one worker and with several.
func TestLiveStreamLineByLine(t *testing.T) {
	for _, c := range []struct {
		name         string
		jobs         int
		line         func(i int) string
		prefix, tail func(i int) string // of the tagged record
	}{
		{"json -j 1", 1, jsonLine, jsonPrefix, jsonTail},
		{"json -j 3", 3, jsonLine, jsonPrefix, jsonTail},
		{"text -j 2", 2, func(i int) string { return fmt.Sprintf("ferry %d\n", i) },
			func(int) string { return "crossing\t" }, func(i int) string { return fmt.Sprintf("\tferry %d", i) }},
	} {
		t.Run(c.name, func(t *testing.T) {
			const n = 50
			w := &lineWriter{lines: make(chan string, n)}
			r := &lockstepReader{out: w.lines}
			for i := range n {
				r.lines = append(r.lines, c.line(i))
			}
			_, err := Run(context.Background(), Options{Tagger: newKeywordTagger(), Jobs: c.jobs}, nil, r, w)
			if r.failed != nil {
				t.Fatal(r.failed)
			}
			if err != nil {
				t.Fatal(err)
			}
			// The reader took each line's record before the next Read,
			// the last one before reporting the end of input.
			if len(r.got) != n || len(w.lines) != 0 {
				t.Fatalf("%d records seen between reads and %d after, want %d and 0", len(r.got), len(w.lines), n)
			}
			for i, l := range r.got {
				if !strings.HasPrefix(l, c.prefix(i)) || !strings.HasSuffix(l, c.tail(i)) {
					t.Fatalf("record %d: %q, want %q...%q", i, l, c.prefix(i), c.tail(i))
				}
			}
		})
	}
}

func jsonLine(i int) string { return fmt.Sprintf(`{"n":%d,"text":"fog and rain at sea"}`+"\n", i) }

func jsonPrefix(i int) string {
	return fmt.Sprintf(`{"n":%d,"text":"fog and rain at sea","tag":"weather"`, i)
}

func jsonTail(int) string { return "}" }

// BenchmarkLiveLine is the time from a line entering an idle pipe to its
// tagged record leaving the pipeline.
func BenchmarkLiveLine(b *testing.B) {
	pr, pw := io.Pipe()
	w := &lineWriter{lines: make(chan string, 1)}
	done := make(chan error, 1)
	go func() {
		_, err := Run(context.Background(), Options{Tagger: newKeywordTagger()}, nil, pr, w)
		done <- err
	}()
	line := []byte(`{"n":1,"text":"fog at the harbour"}` + "\n")
	n := 0
	for b.Loop() {
		pw.Write(line)
		<-w.lines
		n++
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(n), "ns/line")
	pw.Close()
	if err := <-done; err != nil {
		b.Fatal(err)
	}
}

// Cancelling (what SIGINT and SIGTERM do) stops the run with whole lines
// only, every one of them tagged, and the error says why.
func TestCancelWritesWholeLines(t *testing.T) {
	pr, pw := io.Pipe()
	ctx, cancel := context.WithCancel(context.Background())
	var out bytes.Buffer
	done := make(chan error, 1)
	go func() {
		_, err := Run(ctx, Options{Tagger: newKeywordTagger(), Jobs: 2}, nil, pr, &out)
		done <- err
	}()
	go func() {
		for i := 0; ; i++ {
			// Half a line at a time, so a cut can fall inside one.
			if _, err := fmt.Fprintf(pw, `{"n":%d,"text":"wind`, i); err != nil {
				return
			}
			if _, err := fmt.Fprint(pw, ` and rain"}`+"\n"); err != nil {
				return
			}
		}
	}()
	time.Sleep(100 * time.Millisecond)
	cancel()
	err := <-done
	pr.Close()
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("Run returned %v, want context.Canceled", err)
	}
	s := out.String()
	if !strings.HasSuffix(s, "\n") || strings.Count(s, "\n") < 10 {
		t.Fatalf("output does not end in a whole line (%d bytes)", len(s))
	}
	for i, l := range strings.Split(strings.TrimSuffix(s, "\n"), "\n") {
		if want := `{"n":` + strconv.Itoa(i) + `,"text":"wind and rain","tag":"weather"`; !strings.HasPrefix(l, want) {
			t.Fatalf("line %d: %q", i+1, l)
		}
	}
}

// Output to a full disk is an error, and Run says so.
func TestFullDisk(t *testing.T) {
	if _, err := os.Stat("/dev/full"); err != nil {
		t.Skip("no /dev/full on this system")
	}
	for _, o := range []Options{{Output: "/dev/full"}, {Output: "/dev/full", Compress: CompressZstd}} {
		o.Tagger = newKeywordTagger()
		_, err := Run(context.Background(), o, nil, strings.NewReader(chatLog(50000, 3)), nil)
		if err == nil || !strings.Contains(err.Error(), "no space left") {
			t.Errorf("%+v: err %v, want no space left", o.Compress, err)
		}
	}
	f, _ := os.OpenFile("/dev/full", os.O_WRONLY, 0)
	defer f.Close()
	_, err := Run(context.Background(), Options{Tagger: newKeywordTagger()}, nil, strings.NewReader("ferry\n"), f)
	if err == nil {
		t.Errorf("writing to /dev/full as stdout: no error")
	}
}

// A reader that goes away (EPIPE on a pipe that is not stdout) ends the
// run with ErrOutputClosed, which a filter turns into a quiet exit.
func TestOutputClosed(t *testing.T) {
	pr, pw, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	go func() {
		bufio.NewReader(pr).ReadString('\n')
		pr.Close()
	}()
	_, err = Run(context.Background(), Options{Tagger: newKeywordTagger()}, nil, strings.NewReader(chatLog(200000, 4)), pw)
	pw.Close()
	if !errors.Is(err, ErrOutputClosed) {
		t.Fatalf("err %v, want ErrOutputClosed", err)
	}
}

// Output compressed by the file's suffix reads back (with the reference
// tools) as the uncompressed output.
func TestCompressedOutput(t *testing.T) {
	in := chatLog(5000, 5)
	want, _, _ := runString(t, Options{}, in)
	dir := t.TempDir()
	for _, c := range []struct{ name, tool string }{{"out.gz", "gzip"}, {"out.zst", "zstd"}} {
		p := filepath.Join(dir, c.name)
		if _, err := Run(context.Background(), Options{Tagger: newKeywordTagger(), Output: p}, nil, strings.NewReader(in), nil); err != nil {
			t.Fatal(err)
		}
		if _, err := exec.LookPath(c.tool); err != nil {
			if os.Getenv("CI") == "true" {
				t.Fatalf("%s is needed as the reference decompressor", c.tool)
			}
			continue
		}
		got, err := exec.Command(c.tool, "-dc", p).Output()
		if err != nil || string(got) != want {
			t.Errorf("%s: %v, %d bytes, want %d", c.name, err, len(got), len(want))
		}
	}
}

// A Switch swaps the Tagger between two blocks: no record is lost or
// moved, records before the switch get the old tags, after it the new, and
// the output file (with Append) is reopened for appending.
func TestSwitchTagger(t *testing.T) {
	dir := t.TempDir()
	outPath := filepath.Join(dir, "out.txt")
	sw := new(Switch)
	pr, pw := io.Pipe()
	done := make(chan error, 1)
	go func() {
		_, err := Run(context.Background(), Options{Tagger: newKeywordTagger(), Switch: sw, Output: outPath, Append: true}, nil, pr, nil)
		done <- err
	}()
	swapped := newKeywordTagger()
	swapped.labels = []string{"sea", "sky", "land"}
	waitLines := func(n int) {
		for deadline := time.Now().Add(5 * time.Second); time.Now().Before(deadline); time.Sleep(5 * time.Millisecond) {
			if b, err := os.ReadFile(outPath); err == nil && bytes.Count(b, []byte("\n")) >= n {
				return
			}
		}
		t.Fatalf("%d lines not written in time", n)
	}
	for i := range 100 {
		fmt.Fprintf(pw, "ferry %d\n", i)
	}
	waitLines(100)
	os.Rename(outPath, outPath+".1") // as a log rotator would
	sw.Set(swapped)
	for i := 100; i < 200; i++ {
		fmt.Fprintf(pw, "ferry %d\n", i)
	}
	pw.Close()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	before, err1 := os.ReadFile(outPath + ".1")
	after, err2 := os.ReadFile(outPath)
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	lines := strings.Split(strings.TrimSuffix(string(before)+string(after), "\n"), "\n")
	if len(lines) != 200 || strings.Count(string(before), "\n") != 100 {
		t.Fatalf("%d lines, %d before the switch", len(lines), strings.Count(string(before), "\n"))
	}
	for i, l := range lines {
		tag := "crossing"
		if i >= 100 {
			tag = "sea"
		}
		if !strings.HasPrefix(l, tag+"\t") || !strings.HasSuffix(l, "\tferry "+strconv.Itoa(i)) {
			t.Fatalf("line %d: %q", i, l)
		}
	}
}
