package main

import (
	"bytes"
	"compress/gzip"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// temps lists the temporary output files left in dir.
func temps(t *testing.T, dir string) []string {
	t.Helper()
	m, _ := filepath.Glob(filepath.Join(dir, ".convtag-*"))
	return m
}

// gzipped returns s compressed with gzip.
func gzipped(t *testing.T, s string) []byte {
	t.Helper()
	var b bytes.Buffer
	zw := gzip.NewWriter(&b)
	zw.Write([]byte(s))
	zw.Close()
	return b.Bytes()
}

// runWith runs the command with real files as its standard streams.
func runWith(stdin *os.File, stdout *os.File, args ...string) (int, string) {
	var errb bytes.Buffer
	code := run(args, stdin, stdout, &errb)
	return code, errb.String()
}

// Every input is opened before -o or --rejects is created or truncated:
// a missing one stops the run with exit 1, each named once, in order, and
// the old files stay as they were.
func TestTagChecksInputsFirst(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	good := filepath.Join(dir, "good.txt")
	os.WriteFile(good, []byte(chat(20)), 0o644)
	out, rej := filepath.Join(dir, "out.jsonl"), filepath.Join(dir, "rej.jsonl")
	missing1, missing2 := filepath.Join(dir, "nope1.txt"), filepath.Join(dir, "nope2.txt")
	for _, c := range []struct {
		name   string
		inputs []string
		want   []string // on stderr, in this order
	}{
		{"one missing", []string{good, missing1}, []string{missing1 + ": no such file or directory; nothing was written"}},
		{"two missing", []string{missing2, good, missing1}, []string{missing2 + ": no such file", missing1 + ": no such file"}},
		{"a directory", []string{dir, good}, []string{dir + ": is a directory"}},
	} {
		os.WriteFile(out, []byte("old out\n"), 0o644)
		os.WriteFile(rej, []byte("old rejects\n"), 0o644)
		code, stdout, errs := runCmd(t, "", append([]string{"tag", "-m", m, "-o", out, "--rejects", rej}, c.inputs...)...)
		if code != exitFailure || stdout != "" {
			t.Errorf("%s: exit %d, stdout %q, want %d", c.name, code, stdout, exitFailure)
		}
		at := 0
		for _, w := range c.want {
			i := strings.Index(errs[at:], w)
			if i < 0 {
				t.Errorf("%s: stderr %q lacks %q (in order)", c.name, errs, w)
				break
			}
			at += i + len(w)
		}
		if n := strings.Count(errs, "\n"); n != len(c.want) {
			t.Errorf("%s: %d lines on stderr, want %d: %q", c.name, n, len(c.want), errs)
		}
		if b, _ := os.ReadFile(out); string(b) != "old out\n" {
			t.Errorf("%s: -o file now %q", c.name, b)
		}
		if b, _ := os.ReadFile(rej); string(b) != "old rejects\n" {
			t.Errorf("%s: --rejects file now %q", c.name, b)
		}
	}
}

// -o and --rejects are replaced only by a run that read and wrote every
// input (exit 0, or 3 under --strict); a run that fails leaves both as they
// were, says so in its one error line, and leaves no temporary file.
func TestTagReplacesOutputsAtTheEnd(t *testing.T) {
	if _, err := exec.LookPath("gzip"); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("gzip is the reference decoder: %v", err)
		}
		t.Skip("gzip not installed")
	}
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	in := chat(50) + "{\"bad\n"
	good := filepath.Join(dir, "in.txt")
	os.WriteFile(good, []byte(in), 0o644)
	cut := filepath.Join(dir, "cut.gz")
	z := gzipped(t, chat(3000))
	os.WriteFile(cut, z[:len(z)/2], 0o644)
	_, want, _ := runCmd(t, chat(50), "-m", m)
	for _, c := range []struct {
		name    string
		args    []string
		code    int
		replace bool
		stderr  string
	}{
		{"success", []string{good}, exitOK, true, ""},
		{"strict", []string{"--strict", good}, exitRejected, true, "1 records rejected"},
		{"cut input", []string{good, cut}, exitFailure, false, "1 of 2 inputs not read to the end; " + filepath.Join(dir, "out.jsonl.gz") + " left unchanged; " + filepath.Join(dir, "rej.jsonl") + " left unchanged\n"},
	} {
		for _, fresh := range []bool{false, true} {
			out, rej := filepath.Join(dir, "out.jsonl.gz"), filepath.Join(dir, "rej.jsonl")
			os.Remove(out)
			os.Remove(rej)
			stderr := c.stderr
			if !fresh {
				os.WriteFile(out, []byte("old out\n"), 0o644)
				os.WriteFile(rej, []byte("old rejects\n"), 0o644)
			} else {
				stderr = strings.ReplaceAll(stderr, "left unchanged", "not written")
			}
			code, _, errs := runCmd(t, "", append([]string{"tag", "-m", m, "-o", out, "--rejects", rej}, c.args...)...)
			if code != c.code || !strings.Contains(errs, stderr) {
				t.Errorf("%s (fresh %v): exit %d, stderr %q; want %d and %q", c.name, fresh, code, errs, c.code, stderr)
			}
			gotOut, errOut := exec.Command("gzip", "-dc", out).Output() // Debian's gzip reads what -o wrote
			gotRej, errRej := os.ReadFile(rej)
			switch {
			case c.replace && (errOut != nil || string(gotOut) != want || string(gotRej) != "{\"bad\n"):
				t.Errorf("%s (fresh %v): out %d bytes (%v), want %d; rejects %q", c.name, fresh, len(gotOut), errOut, len(want), gotRej)
			case !c.replace && !fresh:
				if b, _ := os.ReadFile(out); string(b) != "old out\n" || string(gotRej) != "old rejects\n" {
					t.Errorf("%s: old files changed: %q, %q", c.name, b, gotRej)
				}
			case !c.replace && fresh:
				if _, err := os.Stat(out); err == nil || errRej == nil {
					t.Errorf("%s: files appeared after a failed run", c.name)
				}
			}
			if l := temps(t, dir); len(l) > 0 {
				t.Errorf("%s: temporary files left: %v", c.name, l)
			}
		}
	}
}

// SIGTERM while writing -o: exit 1, the old file as it was, no temporary
// file left, and the error line says so.
func TestTagInterruptLeavesOutput(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	out := filepath.Join(dir, "out.jsonl")
	os.WriteFile(out, []byte("old out\n"), 0o644)
	p := start(t, "tag", "-m", m, "-o", out)
	go func() {
		for i := 0; ; i++ {
			if _, err := fmt.Fprintf(p.in, `{"id":%d,"text":"fog at the harbour"}`+"\n", i); err != nil {
				return
			}
		}
	}()
	// The temporary file exists once the signal handlers are in place.
	for deadline := time.Now().Add(10 * time.Second); len(temps(t, dir)) == 0; time.Sleep(time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatalf("no temporary file (stderr %q)", p.stderr.String())
		}
	}
	p.cmd.Process.Signal(syscall.SIGTERM)
	p.cmd.Wait()
	if code := p.cmd.ProcessState.ExitCode(); code != exitFailure {
		t.Errorf("exit %d, want %d", code, exitFailure)
	}
	if b, _ := os.ReadFile(out); string(b) != "old out\n" {
		t.Errorf("-o file now %d bytes", len(b))
	}
	if l := temps(t, dir); len(l) > 0 {
		t.Errorf("temporary files left: %v", l)
	}
	if want := "convtag: interrupted; " + out + " left unchanged\n"; p.stderr.String() != want {
		t.Errorf("stderr %q, want %q", p.stderr.String(), want)
	}
}

// Two of the inputs, -o, --rejects, the model and a redirected standard
// input or output that are one file (same device and inode, os.SameFile)
// are a usage error, and nothing is written; the same input twice is fine.
func TestTagSameFile(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	a, b := filepath.Join(dir, "a.jsonl"), filepath.Join(dir, "b.jsonl")
	link, hard := filepath.Join(dir, "link.jsonl"), filepath.Join(dir, "hard.jsonl")
	content := chat(10)
	reset := func() {
		os.WriteFile(a, []byte(content), 0o644)
		os.WriteFile(b, []byte(content), 0o644)
	}
	reset()
	os.Symlink(a, link)
	os.Link(a, hard)
	for _, c := range []struct {
		name  string
		args  []string
		stdin string // a file for standard input, or "" for an empty pipe-like reader
		out   string // a file for standard output, or ""
		code  int
	}{
		{"-o is an input", []string{"-o", a, a}, "", "", exitUsage},
		{"-o through a symlink", []string{"-o", link, a}, "", "", exitUsage},
		{"-o is a hard link", []string{b, "-o", hard, a}, "", "", exitUsage},
		{"--rejects is an input", []string{"-o", b + ".out", "--rejects", a, a}, "", "", exitUsage},
		{"-o is --rejects", []string{"-o", b, "--rejects", link, a}, "", "", exitUsage},
		{"stdin is -o", []string{"-o", a}, a, "", exitUsage},
		{"stdin as - is -o", []string{"-o", a, b, "-"}, a, "", exitUsage},
		{"stdout is an input", []string{a}, "", a, exitUsage},
		{"-o is the model", []string{"-o", m, a}, "", "", exitUsage},
		{"new -o is new --rejects", []string{"-o", filepath.Join(dir, "new.jsonl"), "--rejects", filepath.Join(dir, ".", "new.jsonl"), a}, "", "", exitUsage},
		{"same input twice", []string{"-o", b, a, a, link}, "", "", exitOK},
		{"stdin from a file", []string{"-o", b}, a, "", exitOK},
	} {
		reset()
		stdin, stdout := os.Stdin, os.Stdout
		var err error
		if c.stdin != "" {
			if stdin, err = os.Open(c.stdin); err != nil {
				t.Fatal(err)
			}
		} else {
			stdin, _ = os.Open(os.DevNull)
		}
		if c.out != "" {
			if stdout, err = os.OpenFile(c.out, os.O_WRONLY|os.O_APPEND, 0); err != nil {
				t.Fatal(err)
			}
		} else {
			stdout, _ = os.OpenFile(os.DevNull, os.O_WRONLY, 0)
		}
		code, errs := runWith(stdin, stdout, append([]string{"tag", "-m", m}, c.args...)...)
		stdin.Close()
		stdout.Close()
		if code != c.code {
			t.Errorf("%s: exit %d, want %d (stderr %q)", c.name, code, c.code, errs)
		}
		if c.code == exitUsage {
			if !strings.Contains(errs, "is the same file as") && !strings.Contains(errs, "are one file") || !strings.Contains(errs, "\ntry: ") {
				t.Errorf("%s: stderr %q", c.name, errs)
			}
			if got, _ := os.ReadFile(a); string(got) != content {
				t.Errorf("%s: %s changed", c.name, a)
			}
			if _, err := os.Stat(filepath.Join(dir, "new.jsonl")); err == nil {
				t.Errorf("%s: new.jsonl written", c.name)
			}
		}
	}
}

// A standard output closed at start (`>&-`) is an error, exit 1, before
// any input is read; `>/dev/null` is an ordinary way to discard it, and
// with -o FILE standard output is not used at all. Run as a real process:
// the Go runtime puts /dev/null on a closed descriptor at start.
func TestTagClosedStdout(t *testing.T) {
	bin := binary(t)
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	in := filepath.Join(dir, "in.txt")
	os.WriteFile(in, []byte(chat(100)), 0o644)
	out := filepath.Join(dir, "out.txt")
	for _, c := range []struct {
		name, redirect string
		args           []string
		code           int
		stderr         string
	}{
		{"closed", ">&-", nil, exitFailure, "convtag: standard output is closed"},
		{"closed, -o FILE", ">&-", []string{"-o", out}, exitOK, ""},
		{"/dev/null", ">/dev/null", nil, exitOK, ""},
	} {
		script := `exec "$0" "$@" <` + in + " " + c.redirect
		cmd := exec.Command("sh", append([]string{"-c", script, bin, "tag", "-m", m}, c.args...)...)
		var errb bytes.Buffer
		cmd.Stderr = &errb
		cmd.Run()
		if code := cmd.ProcessState.ExitCode(); code != c.code || !strings.HasPrefix(errb.String(), c.stderr) || (c.stderr == "") != (errb.Len() == 0) {
			t.Errorf("%s: exit %d, stderr %q; want %d, %q", c.name, code, errb.String(), c.code, c.stderr)
		}
		if c.stderr != "" && strings.Count(errb.String(), "\n") != 1 {
			t.Errorf("%s: stderr is not one line: %q", c.name, errb.String())
		}
	}
	if b, _ := os.ReadFile(out); bytes.Count(b, []byte("\n")) != 100 {
		t.Errorf("-o with stdout closed: %d lines", bytes.Count(b, []byte("\n")))
	}
}

// --append onto a .gz or .zst whose last member or frame a killed writer
// cut: exit 1, one line naming the file, nothing written to it. After an
// append to a whole file, Debian's gzip -dc and zstd -dc (the reference
// decoders) read both runs' records.
func TestTagAppendToCutFile(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	_, want, _ := runCmd(t, chat(500), "-m", m)
	for _, c := range []struct{ suffix, tool string }{{".gz", "gzip"}, {".zst", "zstd"}} {
		if _, err := exec.LookPath(c.tool); err != nil {
			if os.Getenv("CI") == "true" {
				t.Fatalf("%s is the reference decoder: %v", c.tool, err)
			}
			t.Skipf("%s not installed", c.tool)
		}
		out := filepath.Join(dir, "tagged.jsonl"+c.suffix)
		for range 2 {
			if code, _, errs := runCmd(t, chat(500), "-m", m, "--append", "-o", out); code != exitOK {
				t.Fatalf("%s: exit %d: %s", c.suffix, code, errs)
			}
		}
		got, err := exec.Command(c.tool, "-dc", out).Output()
		if err != nil || string(got) != want+want {
			t.Errorf("%s -dc: %v, %d bytes, want %d", c.tool, err, len(got), 2*len(want))
		}
		st, _ := os.Stat(out)
		if err := os.Truncate(out, st.Size()-3); err != nil {
			t.Fatal(err)
		}
		before, _ := os.ReadFile(out)
		code, _, errs := runCmd(t, chat(500), "-m", m, "--append", "-o", out)
		if code != exitFailure || !strings.Contains(errs, out) || !strings.Contains(errs, "cut or corrupt") || strings.Count(errs, "\n") != 1 {
			t.Errorf("%s cut: exit %d, stderr %q", c.suffix, code, errs)
		}
		if after, _ := os.ReadFile(out); !bytes.Equal(after, before) {
			t.Errorf("%s cut: the file changed", c.suffix)
		}
	}
}

// Flag values that cannot work are usage errors (exit 2, a try: hint),
// each message naming its own flag.
func TestTagFlagErrors(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	for _, c := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"--append"}, exitUsage, "--append needs -o"},
		{[]string{"--append", "-o", "-"}, exitUsage, "--append needs -o"},
		{[]string{"--unsure-tag", "weather"}, exitUsage, `--unsure-tag "weather"`},
		{[]string{"--format", "text", "--scores"}, exitUsage, "--scores"},
		{[]string{"--format", "text", "--emit", "tsv", "--top", "2"}, exitUsage, "--top"},
		{[]string{"--format", "text", "--why", "1"}, exitUsage, "--why"},
		{[]string{"--format", "text", "--emit", "jsonl", "--scores", "--top", "1"}, exitOK, ""},
		{[]string{"--scores", "--top", "1"}, exitOK, ""}, // auto: JSON records carry them
		{[]string{"--min-confidence", "NaN"}, exitUsage, `--min-confidence "NaN"`},
		{[]string{"--min-confidence", "-0.1"}, exitUsage, "--min-confidence"},
		{[]string{"-k", ""}, exitUsage, `-k ""`},
		{[]string{"-k", "a..b"}, exitUsage, `-k "a..b"`},
		{[]string{"-k", "msg", "-k", ".msg"}, exitUsage, `-k ".msg"`},
		{[]string{"-k", "msg."}, exitUsage, `-k "msg."`},
		{[]string{"-k", "tag"}, exitUsage, `-k "tag"`},
		{[]string{"-k", "confidence.text"}, exitUsage, `-k "confidence.text"`},
		{[]string{"--tag-key", "confidence"}, exitUsage, "--tag-key"},
		{[]string{"--tag-key", ""}, exitUsage, "--tag-key"},
		{[]string{"--confidence-key", "scores", "--scores"}, exitUsage, "--confidence-key"},
		{[]string{"--tag-key", "top", "--top", "2"}, exitUsage, "--tag-key"},
		{[]string{"--tag-key", "why", "--why", "1"}, exitUsage, "--tag-key"},
		{[]string{"--tag-key", "top"}, exitOK, ""}, // no --top: the key is free
		{[]string{"--why", "-2"}, exitUsage, "--why -2"},
		{[]string{"--top", "-1"}, exitUsage, "--top -1"},
		{[]string{"-j", "-1"}, exitUsage, "--jobs -1"},
		{[]string{"--block-size", "-1"}, exitUsage, "--block-size -1"},
		{[]string{"-j", "10000000"}, exitUsage, "--jobs 10000000"},
		{[]string{"--block-size", "9223372036854775807"}, exitUsage, "--block-size 9223372036854775807"},
		{[]string{"-j", "1024", "--block-size", "268435456"}, exitUsage, "in flight"},
		{[]string{"-j", "1024"}, exitOK, ""},
	} {
		code, _, errs := runCmd(t, chat(5), append([]string{"tag", "-m", m}, c.args...)...)
		if code != c.code {
			t.Errorf("%q: exit %d, want %d (stderr %q)", c.args, code, c.code, errs)
			continue
		}
		if c.code == exitUsage && (!strings.HasPrefix(errs, "convtag: "+c.want) && !strings.Contains(errs, c.want) || !strings.Contains(errs, "\ntry: ")) {
			t.Errorf("%q: stderr %q, want %q and a try: hint", c.args, errs, c.want)
		}
	}
}

// A write error names the file once ("write /dev/full: no space left on
// device", not "write /dev/full: write /dev/full: ...").
func TestTagWriteErrorNamesFileOnce(t *testing.T) {
	if _, err := os.Stat("/dev/full"); err != nil {
		t.Skip("no /dev/full")
	}
	m := tagModel(t, t.TempDir(), "m.safetensors", []string{"crossing", "weather"}, 1)
	for _, suffix := range []string{"", ".gz"} {
		args := []string{"-m", m, "-o", "/dev/full"}
		if suffix != "" {
			args = append(args, "--compress", "gzip")
		}
		code, _, errs := runCmd(t, chat(20000), args...)
		if code != exitFailure || strings.Count(errs, "/dev/full") != 1 || !strings.Contains(errs, "no space left") {
			t.Errorf("%q: exit %d, stderr %q", suffix, code, errs)
		}
	}
}

// Inputs that fail while being read (a gzip cut in the middle of file 2,
// one with a wrong CRC-32 in file 4, RFC 1952 section 2.3.1) are reported
// once each, in input order, and the run ends with exit 1 after reading
// the rest.
func TestTagInputErrorsInOrder(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	files := make([]string, 5)
	for i := range files {
		files[i] = filepath.Join(dir, fmt.Sprintf("part%d.gz", i+1))
		z := gzipped(t, chat(4000+i))
		switch i {
		case 1:
			z = z[:len(z)/2]
		case 3:
			z[len(z)-6] ^= 0xff // in the CRC-32 of the trailer
		}
		os.WriteFile(files[i], z, 0o644)
	}
	code, out, errs := runCmd(t, "", append([]string{"tag", "-m", m, "-j", "2"}, files...)...)
	if code != exitFailure {
		t.Errorf("exit %d, want %d", code, exitFailure)
	}
	e2, e4 := "convtag: "+files[1]+": ", "convtag: "+files[3]+": "
	i2, i4 := strings.Index(errs, e2), strings.Index(errs, e4)
	if strings.Count(errs, e2) != 1 || strings.Count(errs, e4) != 1 || i2 < 0 || i4 < i2 || strings.Count(errs, "\n") != 3 {
		t.Errorf("stderr %q: want %s once, then %s once", errs, files[1], files[3])
	}
	if !strings.Contains(errs, "2 of 5 inputs not read to the end") {
		t.Errorf("stderr %q lacks the summary", errs)
	}
	// The whole inputs are all there, after the cut ones' whole lines.
	if n := strings.Count(out, "\n"); n < 4000+4002+4003+4004 {
		t.Errorf("%d lines written", n)
	}
}
