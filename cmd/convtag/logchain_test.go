package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

// rsyslogConf is the chain the README shows, with the test's paths: a
// private Unix socket (imuxsock), a list template that renders each message
// as one JSON object per line (jsonf: rsyslog escapes the values), and
// omprog running convtag with --append so that a restarted convtag adds to
// the file instead of replacing it. hup.signal passes rsyslog's HUP on to
// convtag, which then reopens the output and reloads the model. The omfile
// action keeps the untagged records for the test to compare against.
const rsyslogConf = `global(workDirectory="{{DIR}}/work")
module(load="imuxsock" SysSock.Use="off")
input(type="imuxsock" Socket="{{DIR}}/log.sock" RateLimit.Interval="0")
module(load="omprog")

template(name="convtag-json" type="list" option.jsonf="on") {
  property(outname="time" name="timereported" dateFormat="rfc3339" format="jsonf")
  property(outname="host" name="hostname" format="jsonf")
  property(outname="program" name="programname" format="jsonf")
  property(outname="severity" name="syslogseverity-text" format="jsonf")
  property(outname="msg" name="msg" format="jsonf")
}

if $programname == "ferry-desk" then {
  action(type="omprog" name="convtag"
         binary="{{BIN}} tag -m {{MODEL}} -k msg --append -o {{DIR}}/tagged.jsonl"
         template="convtag-json" hup.signal="HUP" output="{{DIR}}/convtag.log")
  action(type="omfile" file="{{DIR}}/raw.jsonl" template="convtag-json")
  stop
}
*.* action(type="omfile" file="{{DIR}}/rsyslogd.log")
`

// tool finds a program on PATH or in dirs. Under CI=true a missing one
// fails the test; elsewhere the test is skipped.
func tool(t testing.TB, name, pkg string, dirs ...string) string {
	t.Helper()
	if p, err := exec.LookPath(name); err == nil {
		return p
	}
	for _, d := range dirs {
		if p := filepath.Join(d, name); exec.Command(p, "--version").Run() == nil {
			return p
		}
	}
	if os.Getenv("CI") == "true" {
		t.Fatalf("%s is needed (Debian's %s)", name, pkg)
	}
	t.Skipf("%s not installed (Debian's %s)", name, pkg)
	return ""
}

// ferryMessage is the invented message number i: unique, with quotes, a
// backslash, braces and non-ASCII letters for rsyslog's JSON escaping.
func ferryMessage(i int) string {
	phrases := []string{
		"the 9:40 ferry to Skerrow is late",
		`fog at Holm pier, "crossing" held`,
		`ticket desk \ card reader down`,
		"café on deck 2 opens at noon",
		"swell 2.5 m near Pellory, gangway closed",
		"{braces} and a ticket for the harbour",
		"wind from the west, rain on the quay",
	}
	return fmt.Sprintf("#%05d %s", i, phrases[i%len(phrases)])
}

// severities are the logger priorities used in turn, and the names
// rsyslog's syslogseverity-text gives them.
var severities = [][2]string{{"user.info", "info"}, {"user.notice", "notice"}, {"user.warning", "warning"}, {"user.err", "err"}}

type rsyslogChain struct {
	t       testing.TB
	dir     string
	logger  string
	cmd     *exec.Cmd
	out     *syncBuffer
	done    chan struct{}
	sevOf   map[int]string // message number: severity name sent
	stopped bool
}

func startRsyslog(t *testing.T, rsyslogd, logger, bin, model string) *rsyslogChain {
	return startRsyslogConf(t, rsyslogConf, rsyslogd, logger, bin, model)
}

// startRsyslogConf starts rsyslogd -n on conf, with {{DIR}}, {{BIN}} and
// {{MODEL}} replaced, and waits for its socket.
func startRsyslogConf(t testing.TB, conf, rsyslogd, logger, bin, model string) *rsyslogChain {
	dir := t.TempDir()
	if err := os.Mkdir(filepath.Join(dir, "work"), 0o755); err != nil {
		t.Fatal(err)
	}
	conf = strings.NewReplacer("{{DIR}}", dir, "{{BIN}}", bin, "{{MODEL}}", model).Replace(conf)
	confPath := filepath.Join(dir, "rsyslog.conf")
	if err := os.WriteFile(confPath, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := exec.Command(rsyslogd, "-N1", "-f", confPath).CombinedOutput(); err != nil {
		t.Fatalf("rsyslogd -N1: %v\n%s", err, out)
	}
	c := &rsyslogChain{t: t, dir: dir, logger: logger, out: &syncBuffer{}, done: make(chan struct{}), sevOf: map[int]string{}}
	c.cmd = exec.Command(rsyslogd, "-n", "-f", confPath, "-i", filepath.Join(dir, "rsyslogd.pid"))
	c.cmd.Stdout, c.cmd.Stderr = c.out, c.out
	if err := c.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	go func() { c.cmd.Wait(); close(c.done) }()
	t.Cleanup(func() {
		if !c.stopped {
			c.cmd.Process.Kill()
			<-c.done
		}
	})
	c.waitFor("the socket", 10*time.Second, func() bool {
		_, err := os.Stat(filepath.Join(dir, "log.sock"))
		return err == nil
	})
	return c
}

func (c *rsyslogChain) path(name string) string { return filepath.Join(c.dir, name) }

// waitFor polls cond every millisecond until it holds, or fails the test.
func (c *rsyslogChain) waitFor(what string, limit time.Duration, cond func() bool) time.Duration {
	c.t.Helper()
	start := time.Now()
	for !cond() {
		if time.Since(start) > limit {
			log, _ := os.ReadFile(c.path("convtag.log"))
			c.t.Fatalf("no %s after %v (rsyslogd: %q; convtag: %q)", what, limit, c.out.String(), log)
		}
		select {
		case <-c.done:
			c.t.Fatalf("rsyslogd ended waiting for %s: %q", what, c.out.String())
		case <-time.After(time.Millisecond):
		}
	}
	return time.Since(start)
}

// send gives messages from to to-1 to logger, one per line of its standard
// input, with the severity of their batch.
func (c *rsyslogChain) send(from, to int) {
	c.t.Helper()
	for b := from; b < to; {
		e := min(to, (b/250+1)*250)
		sev := severities[(b/250)%len(severities)]
		var in strings.Builder
		for i := b; i < e; i++ {
			in.WriteString(ferryMessage(i) + "\n")
			c.sevOf[i] = sev[1]
		}
		cmd := exec.Command(c.logger, "-u", c.path("log.sock"), "--socket-errors=on", "-t", "ferry-desk", "-p", sev[0])
		cmd.Stdin = strings.NewReader(in.String())
		if out, err := cmd.CombinedOutput(); err != nil {
			c.t.Fatalf("logger: %v\n%s", err, out)
		}
		b = e
	}
}

// lines counts the newlines in the file name (0 when it is missing).
func (c *rsyslogChain) lines(name string) int {
	b, _ := os.ReadFile(c.path(name))
	return bytes.Count(b, []byte("\n"))
}

// child returns the pid of rsyslogd's convtag child, or 0.
func (c *rsyslogChain) child() int {
	tasks, _ := filepath.Glob(fmt.Sprintf("/proc/%d/task/*/children", c.cmd.Process.Pid))
	for _, f := range tasks {
		b, _ := os.ReadFile(f)
		for _, f := range strings.Fields(string(b)) {
			pid, _ := strconv.Atoi(f)
			if comm, _ := os.ReadFile(fmt.Sprintf("/proc/%d/comm", pid)); strings.TrimSpace(string(comm)) == "convtag" {
				return pid
			}
		}
	}
	return 0
}

// stop ends rsyslogd with SIGTERM and waits for it (and so for convtag,
// which sees the end of its input).
func (c *rsyslogChain) stop() {
	c.t.Helper()
	c.cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-c.done:
	case <-time.After(30 * time.Second):
		c.t.Fatalf("rsyslogd did not stop within 30 s of SIGTERM")
	}
	c.stopped = true
}

// taggedRecord is what the template and convtag put in each line.
type taggedRecord struct {
	Time, Host, Program, Severity, Msg, Tag string
	Confidence                              *float64
}

// readTagged reads a tagged file and checks each line is a whole JSON
// record with a tag; it returns the lines and their message numbers.
func (c *rsyslogChain) readTagged(name string, labels []string) ([]string, []int) {
	c.t.Helper()
	b, err := os.ReadFile(c.path(name))
	if err != nil {
		c.t.Fatal(err)
	}
	if len(b) > 0 && b[len(b)-1] != '\n' {
		c.t.Fatalf("%s ends inside a record: %q", name, b[max(0, len(b)-80):])
	}
	var lines []string
	var nums []int
	for l := range strings.Lines(string(b)) {
		var r taggedRecord
		if err := json.Unmarshal([]byte(l), &r); err != nil {
			c.t.Fatalf("%s: not a whole JSON record: %q: %v", name, l, err)
		}
		msg := strings.TrimPrefix(r.Msg, " ") // rsyslog keeps the space after "tag:"
		n, err := strconv.Atoi(strings.TrimPrefix(strings.Fields(msg + " x")[0], "#"))
		if err != nil || msg != ferryMessage(n) {
			c.t.Fatalf("%s: message %q is none that was sent", name, r.Msg)
		}
		if _, err := time.Parse(time.RFC3339Nano, r.Time); err != nil || r.Host == "" || r.Program != "ferry-desk" || r.Severity != c.sevOf[n] {
			c.t.Fatalf("%s: fields not as sent (severity %q): %q", name, c.sevOf[n], l)
		}
		if !slices.Contains(labels, r.Tag) || r.Confidence == nil || *r.Confidence < 0 || *r.Confidence > 1 {
			c.t.Fatalf("%s: not tagged: %q", name, l)
		}
		lines = append(lines, strings.TrimSuffix(l, "\n"))
		nums = append(nums, n)
	}
	return lines, nums
}

// rsyslog hands every message to convtag through omprog; convtag writes
// them tagged to a file, in the order sent, whole, through idle times, a
// log rotation on HUP, a crash of convtag and the end of rsyslogd.
func TestRsyslogChain(t *testing.T) {
	start := time.Now()
	rsyslogd := tool(t, "rsyslogd", "rsyslog", "/usr/sbin", "/sbin")
	logger := tool(t, "logger", "bsdutils (util-linux)")
	bin := binary(t)
	labels := []string{"crossing", "weather"}
	model := tagModel(t, t.TempDir(), "m.safetensors", labels, 1)
	c := startRsyslog(t, rsyslogd, logger, bin, model)
	n := 0
	sendAll := func(k int) {
		c.send(n, n+k)
		n += k
	}

	// A few thousand messages in a row.
	sendAll(2000)
	c.waitFor("2000 tagged records", 60*time.Second, func() bool { return c.lines("tagged.jsonl") >= n })

	// Idle input: one message is written within 100 ms of logger handing
	// it over (the live-chain target).
	var worst time.Duration
	for range 5 {
		time.Sleep(50 * time.Millisecond)
		sendAll(1)
		worst = max(worst, c.waitFor("the idle message", 10*time.Second, func() bool { return c.lines("tagged.jsonl") >= n }))
	}
	t.Logf("idle message written after at most %v", worst)
	if worst > 100*time.Millisecond {
		t.Errorf("a message on idle input took %v to be written, want under 100 ms", worst)
	}

	// Rotation as logrotate does it: move the file, then HUP rsyslogd,
	// which passes the HUP on (hup.signal); convtag reopens its output.
	// rsyslog keeps the same convtag process.
	pid := c.child()
	if pid == 0 {
		t.Fatal("no convtag child of rsyslogd")
	}
	before := n
	if err := os.Rename(c.path("tagged.jsonl"), c.path("tagged.jsonl.1")); err != nil {
		t.Fatal(err)
	}
	c.cmd.Process.Signal(syscall.SIGHUP)
	c.waitFor("convtag's reload", 10*time.Second, func() bool {
		b, _ := os.ReadFile(c.path("convtag.log"))
		return bytes.Contains(b, []byte("reloaded"))
	})
	sendAll(300)
	c.waitFor("records in the new file", 30*time.Second, func() bool { return c.lines("tagged.jsonl") >= n-before })
	if p := c.child(); p != pid {
		t.Errorf("convtag pid %d after HUP, was %d: want the same process", p, pid)
	}

	// A crash: convtag killed while idle. rsyslogd starts it again on the
	// next message; with --append nothing already written is lost, and
	// nothing is written twice.
	if err := syscall.Kill(pid, syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	c.waitFor("the end of the killed convtag", 10*time.Second, func() bool { return c.child() != pid })
	restartFrom := n
	t0 := time.Now()
	sendAll(300)
	c.waitFor("records after the restart", 60*time.Second, func() bool { return c.lines("tagged.jsonl") >= n-before })
	t.Logf("after the kill, rsyslogd's new convtag had written all 300 messages in %v", time.Since(t0).Round(time.Millisecond))
	if p := c.child(); p == 0 || p == pid {
		t.Errorf("no new convtag after the kill (pid %d)", p)
	}

	// The end: more messages, then SIGTERM for rsyslogd as soon as it has
	// handed them all on (its omfile copy, the action after omprog, holds
	// them). What rsyslogd still had queued at SIGTERM is its own to keep
	// or discard; what it had written to convtag's pipe must all arrive.
	sendAll(400)
	c.waitFor("rsyslogd's own copy of every message", 30*time.Second, func() bool { return c.lines("raw.jsonl") >= n })
	c.stop()

	old, oldNums := c.readTagged("tagged.jsonl.1", labels)
	cur, curNums := c.readTagged("tagged.jsonl", labels)
	got := append(oldNums, curNums...)
	want := make([]int, n)
	for i := range want {
		want[i] = i
	}
	if !slices.Equal(got, want) {
		t.Fatalf("message numbers in the files are not 0..%d in order (%d records; rotated file %d, first after the restart at %d)", n-1, len(got), len(oldNums), restartFrom)
	}
	if len(oldNums) != before {
		t.Errorf("rotated file holds %d records, want the %d sent before the HUP", len(oldNums), before)
	}

	// Byte for byte: each record is what convtag makes of rsyslog's own
	// rendering of the message (the omfile copy), tagged in one run.
	raw, err := os.ReadFile(c.path("raw.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	ref := exec.Command(bin, "tag", "-m", model, "-k", "msg")
	ref.Stdin = bytes.NewReader(raw)
	refOut, err := ref.Output()
	if err != nil {
		t.Fatal(err)
	}
	wantLines := strings.Split(strings.TrimSuffix(string(refOut), "\n"), "\n")
	if gotLines := append(old, cur...); !slices.Equal(gotLines, wantLines) {
		for i := range min(len(gotLines), len(wantLines)) {
			if gotLines[i] != wantLines[i] {
				t.Fatalf("record %d differs from convtag over rsyslog's copy:\n got %q\nwant %q", i, gotLines[i], wantLines[i])
			}
		}
		t.Fatalf("%d records, %d in rsyslog's copy", len(gotLines), len(wantLines))
	}
	t.Logf("%d messages through rsyslogd in %v", n, time.Since(start).Round(time.Millisecond))
}

// SIGTERM for convtag in the middle of a stream: the chain's restart path
// under load. Records that reached the output stay whole, in order and
// single; what was still in the pipe when convtag stopped is lost, because
// omprog without confirmMessages has no way to know it was not taken.
func TestRsyslogChainTermUnderLoad(t *testing.T) {
	rsyslogd := tool(t, "rsyslogd", "rsyslog", "/usr/sbin", "/sbin")
	logger := tool(t, "logger", "bsdutils (util-linux)")
	bin := binary(t)
	labels := []string{"crossing", "weather"}
	model := tagModel(t, t.TempDir(), "m.safetensors", labels, 1)
	c := startRsyslog(t, rsyslogd, logger, bin, model)
	c.send(0, 500)
	c.waitFor("the first records", 30*time.Second, func() bool { return c.lines("tagged.jsonl") >= 500 })
	pid := c.child()
	sent := make(chan struct{})
	go func() {
		defer close(sent)
		for i := 500; i < 3000; i += 250 {
			var in strings.Builder
			for j := i; j < i+250; j++ {
				in.WriteString(ferryMessage(j) + "\n")
			}
			cmd := exec.Command(logger, "-u", c.path("log.sock"), "-t", "ferry-desk", "-p", "user.info")
			cmd.Stdin = strings.NewReader(in.String())
			cmd.Run()
		}
	}()
	c.waitFor("records under load", 30*time.Second, func() bool { return c.lines("tagged.jsonl") >= 700 })
	syscall.Kill(pid, syscall.SIGTERM)
	<-sent
	for i := 500; i < 3000; i++ {
		c.sevOf[i] = "info"
	}
	for i := range 500 {
		c.sevOf[i] = severities[(i/250)%len(severities)][1]
	}
	// The last message must come through: after it, the file is complete.
	c.waitFor("the last message", 60*time.Second, func() bool {
		b, _ := os.ReadFile(c.path("tagged.jsonl"))
		return bytes.Contains(b, []byte(ferryMessage(2999)))
	})
	if p := c.child(); p == pid {
		t.Errorf("convtag pid %d still running after SIGTERM", p)
	}
	c.stop()
	_, nums := c.readTagged("tagged.jsonl", labels)
	if !slices.IsSorted(nums) || len(slices.Compact(slices.Clone(nums))) != len(nums) {
		t.Fatalf("records out of order or written twice")
	}
	if nums[0] != 0 || len(nums) < 700 {
		t.Fatalf("records before the SIGTERM lost: %d records, first %d", len(nums), nums[0])
	}
	t.Logf("SIGTERM under load: %d of 3000 messages written, %d lost in flight", len(nums), 3000-len(nums))
}

// logrotate's way with `convtag tag --append -o FILE`: the file is moved while
// records stream in, then SIGHUP; the old file ends on a whole record, the
// new one begins with the next, and nothing is lost or written twice.
func TestTagRotateOnHUP(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	outPath := filepath.Join(dir, "tagged.jsonl")
	p := start(t, "tag", "-m", m, "--append", "-o", outPath)
	const n = 300000
	fed := make(chan struct{})
	go func() {
		defer close(fed)
		w := bufio.NewWriter(p.in)
		for i := range n {
			fmt.Fprintf(w, `{"n":%d,"text":"fog over the ferry deck, swell at Holm"}`+"\n", i)
		}
		w.Flush()
		p.in.Close()
	}()
	// Rotate while records keep coming: once some output is there, move
	// the file and signal.
	deadline := time.Now().Add(30 * time.Second)
	for {
		if st, err := os.Stat(outPath); err == nil && st.Size() > 0 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("no output (stderr %q)", p.stderr.String())
		}
		time.Sleep(time.Millisecond)
	}
	if err := os.Rename(outPath, outPath+".1"); err != nil {
		t.Fatal(err)
	}
	p.cmd.Process.Signal(syscall.SIGHUP)
	<-fed
	if err := p.cmd.Wait(); err != nil {
		t.Fatalf("exit: %v (stderr %q)", err, p.stderr.String())
	}
	var all []byte
	for _, f := range []string{outPath + ".1", outPath} {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		if len(b) == 0 || b[len(b)-1] != '\n' {
			t.Fatalf("%s is empty or ends inside a record (%d bytes)", f, len(b))
		}
		all = append(all, b...)
	}
	oldLines := bytes.Count(must(os.ReadFile(outPath+".1")), []byte("\n"))
	if oldLines == 0 || oldLines == n {
		t.Fatalf("rotated file holds %d of %d records: the rotation did not fall mid-stream", oldLines, n)
	}
	i := 0
	for l := range bytes.Lines(all) {
		var r struct {
			N   *int
			Tag string
		}
		if err := json.Unmarshal(l, &r); err != nil || r.N == nil || *r.N != i || r.Tag == "" {
			t.Fatalf("record %d: %q (%v)", i, l, err)
		}
		i++
	}
	if i != n {
		t.Fatalf("%d records, want %d", i, n)
	}
	t.Logf("rotated after %d of %d records", oldLines, n)
}

func must[T any](v T, err error) T {
	if err != nil {
		panic(err)
	}
	return v
}
