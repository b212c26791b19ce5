package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"convtag/model"
	"convtag/model/token"
)

// tagModel builds a small random model of the invented ferry scenario and
// saves it under dir: random weights still give fixed tags, which is all
// the stream tests need.
func tagModel(t testing.TB, dir, name string, labels []string, seed uint64) string {
	t.Helper()
	cfg := model.Config{Dim: 8, Widths: []int{3, 4, 5}, Filters: 4, Buckets: 64}
	words := []string{"ferry", "harbour", "fog", "wind", "ticket", "deck", "storm", "rain", "late", "gull"}
	m, err := model.New(cfg, token.Settings{}, labels, words, seed)
	if err != nil {
		t.Fatal(err)
	}
	model.FoldModel(m, false)
	p := filepath.Join(dir, name)
	if err := m.Save(p, model.SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	return p
}

var (
	buildOnce sync.Once
	binPath   string
	binErr    error
	fixDir    string
)

// binary builds convtag once for the tests that need a real process
// (signals, pipes, GNU parallel).
func binary(t testing.TB) string {
	t.Helper()
	buildOnce.Do(func() {
		fixDir, binErr = os.MkdirTemp("", "convtag-tag-test")
		if binErr != nil {
			return
		}
		binPath = filepath.Join(fixDir, "convtag")
		out, err := exec.Command("go", "build", "-o", binPath, ".").CombinedOutput()
		if err != nil {
			binErr = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if binErr != nil {
		t.Fatal(binErr)
	}
	return binPath
}

func TestMain(m *testing.M) {
	code := m.Run()
	if fixDir != "" {
		os.RemoveAll(fixDir)
	}
	os.Exit(code)
}

// chat returns n invented records, JSON and text mixed.
func chat(n int) string {
	words := []string{"ferry", "harbour", "fog", "wind", "ticket", "deck", "storm", "rain", "late", "gull", "Skerrow", "noon"}
	var b strings.Builder
	for i := range n {
		text := words[i%len(words)] + " " + words[(i*7+3)%len(words)] + " " + words[(i*5+1)%len(words)]
		if i%3 == 0 {
			fmt.Fprintf(&b, "%s at %d\n", text, i)
		} else {
			fmt.Fprintf(&b, `{"id":%d,"text":"%s"}`+"\n", i, text)
		}
	}
	return b.String()
}

func TestTagFlags(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	in := `{"id":1,"body":{"msg":"fog"},"text":"ferry late"}` + "\n" + "wind and rain\n" + "{\"broken\n"
	code, out, errs := runCmd(t, in, "tag", "-m", m, "--tag-key", "kind", "--confidence-key", "p", "-k", "body.msg", "--scores", "--top", "1", "--emit", "jsonl", "--stats")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != 3 || lines[2] != `{"broken` {
		t.Fatalf("out %q", out)
	}
	for _, l := range lines[:2] {
		var v map[string]any
		if err := json.Unmarshal([]byte(l), &v); err != nil {
			t.Fatalf("%q: %v", l, err)
		}
		if _, ok := v["kind"].(string); !ok || v["p"] == nil || v["scores"] == nil || v["top"] == nil {
			t.Errorf("keys missing in %q", l)
		}
	}
	if !strings.HasPrefix(lines[1], `{"text":"wind and rain",`) {
		t.Errorf("--emit jsonl: %q", lines[1])
	}
	if !strings.Contains(errs, "stdin:3: malformed JSON") || !strings.Contains(errs, "records in") {
		t.Errorf("stderr %q", errs)
	}

	// Every record is written; --keep and --drop split them exactly.
	code, all, _ := runCmd(t, chat(300), "-m", m, "--format", "text")
	_, kept, _ := runCmd(t, chat(300), "-m", m, "--format", "text", "--keep", "weather")
	_, dropped, _ := runCmd(t, chat(300), "-m", m, "--format", "text", "--drop", "weather")
	if code != exitOK || strings.Count(all, "\n") != 300 || strings.Count(kept, "\n")+strings.Count(dropped, "\n") != 300 {
		t.Errorf("--keep/--drop: %d + %d lines of %d", strings.Count(kept, "\n"), strings.Count(dropped, "\n"), strings.Count(all, "\n"))
	}
	for _, l := range strings.Split(strings.TrimSuffix(kept, "\n"), "\n") {
		if !strings.HasPrefix(l, "weather\t") {
			t.Errorf("--keep weather wrote %q", l)
			break
		}
	}

	for _, c := range []struct {
		args []string
		code int
	}{
		{[]string{"-m", m, "--keep", "nosuch"}, exitUsage},
		{[]string{"-m", m, "--format", "xml"}, exitUsage},
		{[]string{"-m", m, "--min-confidence", "2"}, exitUsage},
		{[]string{"-m", filepath.Join(dir, "missing.safetensors")}, exitUsage},
		{[]string{"-m", m, "--strict"}, exitRejected},
		{[]string{"-m", m, filepath.Join(dir, "missing.txt")}, exitFailure},
	} {
		code, _, errs := runCmd(t, "{\"bad\n", append([]string{"tag"}, c.args...)...)
		if code != c.code || !strings.HasPrefix(errs, "convtag: ") {
			t.Errorf("%v: exit %d (stderr %q), want %d", c.args, code, errs, c.code)
		}
	}
}

// -o with a .gz suffix writes gzip, --rejects takes the bad records.
func TestTagOutputFiles(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	outPath, rejPath := filepath.Join(dir, "out.jsonl.gz"), filepath.Join(dir, "rej.jsonl")
	_, plain, _ := runCmd(t, chat(100), "-m", m)
	code, out, errs := runCmd(t, chat(100)+"{\"bad\n", "-m", m, "-o", outPath, "--rejects", rejPath)
	if code != exitOK || out != "" {
		t.Fatalf("exit %d, stdout %q, stderr %q", code, out, errs)
	}
	got, err := exec.Command("gzip", "-dc", outPath).Output()
	if err != nil || string(got) != plain {
		t.Errorf("gzip -dc: %v, %d bytes, want %d", err, len(got), len(plain))
	}
	if rej, _ := os.ReadFile(rejPath); string(rej) != "{\"bad\n" {
		t.Errorf("rejects %q", rej)
	}
}

// `| head -1` ends quietly, as Unix filters do: nothing on stderr, and
// either exit 0 or death by SIGPIPE.
func TestTagHeadQuiet(t *testing.T) {
	bin := binary(t)
	m := tagModel(t, t.TempDir(), "m.safetensors", []string{"crossing", "weather"}, 1)
	in := filepath.Join(t.TempDir(), "in.txt")
	os.WriteFile(in, []byte(chat(200000)), 0o644)
	var errb bytes.Buffer
	c := exec.Command(bin, "tag", "-m", m, in)
	c.Stderr = &errb
	stdout, _ := c.StdoutPipe()
	if err := c.Start(); err != nil {
		t.Fatal(err)
	}
	bufio.NewReader(stdout).ReadString('\n')
	stdout.Close()
	err := c.Wait()
	if errb.Len() != 0 {
		t.Errorf("stderr after the reader left: %q", errb.String())
	}
	if err != nil {
		ws, ok := c.ProcessState.Sys().(syscall.WaitStatus)
		if !ok || !ws.Signaled() || ws.Signal() != syscall.SIGPIPE {
			t.Errorf("exit: %v, want 0 or SIGPIPE", err)
		}
	}
}

// Output to a full disk: an error on stderr and a non-zero exit.
func TestTagDevFull(t *testing.T) {
	bin := binary(t)
	m := tagModel(t, t.TempDir(), "m.safetensors", []string{"crossing", "weather"}, 1)
	for _, args := range [][]string{{"-o", "/dev/full"}, {}} {
		c := exec.Command(bin, append([]string{"tag", "-m", m}, args...)...)
		c.Stdin = strings.NewReader(chat(20000))
		full, err := os.OpenFile("/dev/full", os.O_WRONLY, 0)
		if err != nil {
			t.Skip("no /dev/full")
		}
		c.Stdout = full
		var errb bytes.Buffer
		c.Stderr = &errb
		err = c.Run()
		full.Close()
		if code := c.ProcessState.ExitCode(); err == nil || code != exitFailure || !strings.Contains(errb.String(), "no space left") {
			t.Errorf("%v: exit %d, stderr %q", args, code, errb.String())
		}
	}
}

// proc is a running convtag fed through a pipe.
type proc struct {
	cmd    *exec.Cmd
	in     io.WriteCloser
	out    *bufio.Reader
	stderr *syncBuffer
}

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func start(t *testing.T, args ...string) *proc {
	t.Helper()
	p := &proc{cmd: exec.Command(binary(t), args...), stderr: &syncBuffer{}}
	p.cmd.Stderr = p.stderr
	var err error
	if p.in, err = p.cmd.StdinPipe(); err != nil {
		t.Fatal(err)
	}
	out, err := p.cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	p.out = bufio.NewReader(out)
	if err := p.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { p.cmd.Process.Kill(); p.cmd.Wait() })
	return p
}

// readLines reads n lines of output, failing after 10 s.
func (p *proc) readLines(t *testing.T, n int) []string {
	t.Helper()
	got := make(chan []string, 1)
	go func() {
		var ls []string
		for range n {
			l, err := p.out.ReadString('\n')
			if err != nil {
				break
			}
			ls = append(ls, l)
		}
		got <- ls
	}()
	select {
	case ls := <-got:
		if len(ls) != n {
			t.Fatalf("%d lines, want %d (stderr %q)", len(ls), n, p.stderr.String())
		}
		return ls
	case <-time.After(10 * time.Second):
		t.Fatalf("no %d lines after 10 s (stderr %q)", n, p.stderr.String())
	}
	return nil
}

// SIGTERM mid-stream: the output ends with a whole line, every line is a
// whole tagged record, and the exit status is 1.
func TestTagSIGTERM(t *testing.T) {
	m := tagModel(t, t.TempDir(), "m.safetensors", []string{"crossing", "weather"}, 1)
	p := start(t, "tag", "-m", m)
	go func() {
		for i := 0; ; i++ {
			if _, err := fmt.Fprintf(p.in, `{"id":%d,"text":"fog at the harbour"}`+"\n", i); err != nil {
				return
			}
		}
	}()
	p.readLines(t, 1000)
	p.cmd.Process.Signal(syscall.SIGTERM)
	rest, _ := io.ReadAll(p.out)
	p.cmd.Wait()
	if code := p.cmd.ProcessState.ExitCode(); code != exitFailure {
		t.Errorf("exit %d, want %d", code, exitFailure)
	}
	if len(rest) > 0 && rest[len(rest)-1] != '\n' {
		t.Fatalf("output ends inside a line: %q", rest[max(0, len(rest)-80):])
	}
	for _, l := range strings.Split(strings.TrimSuffix(string(rest), "\n"), "\n") {
		if l != "" && !json.Valid([]byte(l)) || l != "" && !strings.Contains(l, `"tag":`) {
			t.Fatalf("not a whole tagged record: %q", l)
		}
	}
	if !strings.Contains(p.stderr.String(), "interrupted") {
		t.Errorf("stderr %q", p.stderr.String())
	}
}

// SIGHUP reloads the model between two blocks: every record comes out, in
// order, the ones after the reload with the new model's tags; a bad file is
// reported and the old model kept.
func TestTagSIGHUP(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	newer := tagModel(t, dir, "new.safetensors", []string{"sea", "sky"}, 2)
	p := start(t, "tag", "-m", m, "--format", "text")
	send := func(from, to int) {
		for i := from; i < to; i++ {
			fmt.Fprintf(p.in, "ferry line %d\n", i)
		}
	}
	hup := func(want string) {
		p.cmd.Process.Signal(syscall.SIGHUP)
		for deadline := time.Now().Add(10 * time.Second); !strings.Contains(p.stderr.String(), want); time.Sleep(5 * time.Millisecond) {
			if time.Now().After(deadline) {
				t.Fatalf("no %q on stderr: %q", want, p.stderr.String())
			}
		}
	}
	var lines []string
	send(0, 50)
	lines = append(lines, p.readLines(t, 50)...)
	os.Rename(newer, m) // replace the file, never rewrite a mapped one
	hup("reloaded")
	send(50, 100)
	lines = append(lines, p.readLines(t, 50)...)
	os.WriteFile(newer, []byte("not a model"), 0o644)
	os.Rename(newer, m)
	hup("keeping the current model")
	send(100, 150)
	lines = append(lines, p.readLines(t, 50)...)
	p.in.Close()
	if err := p.cmd.Wait(); err != nil {
		t.Fatalf("exit: %v (stderr %q)", err, p.stderr.String())
	}
	for i, l := range lines {
		tags := "crossing weather"
		if i >= 50 {
			tags = "sea sky"
		}
		tag, _, _ := strings.Cut(l, "\t")
		if !strings.Contains(tags, tag) || !strings.HasSuffix(l, fmt.Sprintf("\tferry line %d\n", i)) {
			t.Fatalf("line %d: %q, want a tag of %q", i, l, tags)
		}
	}
}

// GNU parallel shards the stream over 4 processes and gives back, byte for
// byte, what one process writes.
func TestTagUnderGNUParallel(t *testing.T) {
	bin := binary(t)
	if _, err := exec.LookPath("parallel"); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("GNU parallel is needed: %v", err)
		}
		t.Skip("GNU parallel not installed")
	}
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	in := chat(30000)
	one := exec.Command(bin, "tag", "-m", m)
	one.Stdin = strings.NewReader(in)
	want, err := one.Output()
	if err != nil {
		t.Fatal(err)
	}
	par := exec.Command("parallel", "--will-cite", "--pipe", "--keep-order", "--block", "100k", "-j", "4", bin, "tag", "-m", m)
	par.Stdin = strings.NewReader(in)
	par.Env = append(os.Environ(), "HOME="+dir) // parallel keeps state under $HOME
	got, err := par.Output()
	if err != nil {
		t.Fatalf("parallel: %v", err)
	}
	if !bytes.Equal(got, want) {
		t.Fatalf("parallel: %d bytes, one process %d", len(got), len(want))
	}
}

// BenchmarkTagVsJq runs `jq -c .` (Debian's jq, the baseline) and
// `convtag tag -j 2` over the same 200,000 invented JSON records in each
// iteration, with a d=300, 3×100-filter folded model over 5,000 words, and
// reports both rates and their ratio (the target is 2× or more).
func BenchmarkTagVsJq(b *testing.B) {
	jq, err := exec.LookPath("jq")
	if err != nil {
		if os.Getenv("CI") == "true" {
			b.Fatalf("jq is the baseline: %v", err)
		}
		b.Skip("jq not installed")
	}
	bin := binary(b)
	dir := b.TempDir()
	words := make([]string, 5000)
	for i := range words {
		words[i] = fmt.Sprintf("w%dx", i)
	}
	cfg := model.Config{Dim: 300, Widths: []int{3, 4, 5}, Filters: 100, Buckets: 1000}
	m, err := model.New(cfg, token.Settings{}, []string{"crossing", "weather", "other"}, words, 1)
	if err != nil {
		b.Fatal(err)
	}
	model.FoldModel(m, false)
	mp := filepath.Join(dir, "d300.safetensors")
	if err := m.Save(mp, model.SaveOptions{}); err != nil {
		b.Fatal(err)
	}
	const n = 200_000
	var in bytes.Buffer
	for i := range n {
		fmt.Fprintf(&in, `{"id":%d,"user":"u%d","text":"`, i, i%50)
		for k := range 5 + i%36 {
			if k > 0 {
				in.WriteByte(' ')
			}
			in.WriteString(words[(i*31+k*k*7)%(1+i%len(words))])
		}
		in.WriteString("\"}\n")
	}
	inPath := filepath.Join(dir, "in.jsonl")
	os.WriteFile(inPath, in.Bytes(), 0o644)
	timeRun := func(name string, args ...string) time.Duration {
		c := exec.Command(name, args...)
		f, _ := os.Open(inPath)
		defer f.Close()
		c.Stdin = f
		t0 := time.Now()
		if out, err := c.Output(); err != nil || bytes.Count(out, []byte("\n")) != n {
			b.Fatalf("%s: %v", name, err)
		}
		return time.Since(t0)
	}
	var tj, tc time.Duration
	b.SetBytes(int64(in.Len()))
	for b.Loop() {
		tj += timeRun(jq, "-c", ".")
		tc += timeRun(bin, "tag", "-m", mp, "-j", "2")
	}
	runs := float64(b.N)
	b.ReportMetric(n*runs/tj.Seconds(), "jq_rec/s")
	b.ReportMetric(n*runs/tc.Seconds(), "convtag_rec/s")
	b.ReportMetric(tj.Seconds()/tc.Seconds(), "ratio")
}
