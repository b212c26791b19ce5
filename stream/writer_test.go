package stream

import (
	"context"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// leftovers lists the temporary files left in dir.
func leftovers(t *testing.T, dir string) []string {
	t.Helper()
	m, err := filepath.Glob(filepath.Join(dir, ".convtag-*"))
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// Without Append, Output is replaced only by a run that read and wrote
// everything: a missing input, a cut compressed input or an interruption
// leaves the old file as it was, and no temporary file behind.
func TestRunReplacesOutputOnlyOnSuccess(t *testing.T) {
	dir := t.TempDir()
	in := "ferry at noon\nfog on the quay\n"
	good := filepath.Join(dir, "in.txt")
	cut := filepath.Join(dir, "cut.gz")
	os.WriteFile(good, []byte(in), 0o644)
	os.WriteFile(cut, []byte{0x1f, 0x8b, 8, 0, 0, 0, 0, 0, 0, 0xff, 0x01}, 0o644) // a gzip header and a cut deflate block
	cancelled, cancel := context.WithCancel(context.Background())
	cancel()
	want, _, _ := runString(t, Options{}, in)
	for _, c := range []struct {
		name    string
		ctx     context.Context
		inputs  []string
		old     string // "" means no file before the run
		replace bool
	}{
		{"new file", context.Background(), []string{good}, "", true},
		{"old file", context.Background(), []string{good}, "old line\n", true},
		{"missing input", context.Background(), []string{good, filepath.Join(dir, "nope.txt")}, "old line\n", false},
		{"missing input, no old file", context.Background(), []string{filepath.Join(dir, "nope.txt"), good}, "", false},
		{"cut gzip input", context.Background(), []string{good, cut}, "old line\n", false},
		{"interrupted", cancelled, []string{good}, "old line\n", false},
	} {
		for _, suffix := range []string{".jsonl", ".jsonl.gz"} {
			out := filepath.Join(dir, "out"+suffix)
			os.Remove(out)
			if c.old != "" {
				os.WriteFile(out, []byte(c.old), 0o644)
			}
			_, err := Run(c.ctx, Options{Tagger: newKeywordTagger(), Output: out}, c.inputs, nil, nil)
			if (err == nil) != c.replace {
				t.Errorf("%s%s: err %v", c.name, suffix, err)
			}
			got, rerr := os.ReadFile(out)
			switch {
			case c.replace && suffix == ".jsonl" && string(got) != want:
				t.Errorf("%s%s: %q, want %q", c.name, suffix, got, want)
			case c.replace && suffix == ".jsonl.gz" && !strings.HasPrefix(string(got), "\x1f\x8b"):
				t.Errorf("%s%s: not gzip: %q", c.name, suffix, got)
			case !c.replace && c.old != "" && string(got) != c.old:
				t.Errorf("%s%s: old file changed to %q", c.name, suffix, got)
			case !c.replace && c.old == "" && !errors.Is(rerr, os.ErrNotExist):
				t.Errorf("%s%s: a file appeared (%q, %v)", c.name, suffix, got, rerr)
			}
			if l := leftovers(t, dir); len(l) > 0 {
				t.Errorf("%s%s: temporary files left: %v", c.name, suffix, l)
			}
		}
	}
}

// The temporary file sits beside the file, ends with its name (so a
// suffix still picks the compression) and gets the mode a new file gets
// (0666 less the umask), or the permission bits of the file it replaces.
func TestOutputFileNameAndMode(t *testing.T) {
	dir := t.TempDir()
	old := syscall.Umask(0o022)
	defer syscall.Umask(old)
	for _, c := range []struct {
		name string
		prev os.FileMode // 0: no file before
		want os.FileMode
	}{
		{"new.jsonl.gz", 0, 0o644},
		{"private.jsonl", 0o600, 0o600},
		{"group.jsonl.zst", 0o640, 0o640},
		{"shared.jsonl", 0o666, 0o666}, // kept, though the umask would clear g+w, o+w
	} {
		path := filepath.Join(dir, c.name)
		if c.prev != 0 {
			os.WriteFile(path, []byte("old\n"), c.prev)
			os.Chmod(path, c.prev)
		}
		r, err := CreateOutputFile(path)
		if err != nil {
			t.Fatal(err)
		}
		base := filepath.Base(r.tmp)
		if filepath.Dir(r.tmp) != dir || !strings.HasPrefix(base, ".convtag-") || !strings.HasSuffix(base, "-"+c.name) {
			t.Errorf("%s: temporary file %s", c.name, r.tmp)
		}
		st, err := os.Stat(r.tmp)
		if err != nil || st.Mode().Perm() != c.want {
			t.Errorf("%s: temporary file mode %v (%v), want %v", c.name, st.Mode().Perm(), err, c.want)
		}
		r.Write([]byte("new\n"))
		if err := r.Commit(); err != nil {
			t.Fatal(err)
		}
		if b, _ := os.ReadFile(path); string(b) != "new\n" {
			t.Errorf("%s: %q after Commit", c.name, b)
		}
		if st, _ := os.Stat(path); st.Mode().Perm() != c.want {
			t.Errorf("%s: mode %v after Commit, want %v", c.name, st.Mode().Perm(), c.want)
		}
	}
	// A file that cannot be written is not replaced either, as opening it
	// for writing would have failed.
	ro := filepath.Join(dir, "ro.jsonl")
	os.WriteFile(ro, []byte("old\n"), 0o444)
	if os.Geteuid() != 0 {
		if _, err := CreateOutputFile(ro); !errors.Is(err, os.ErrPermission) {
			t.Errorf("read-only file: %v, want permission denied", err)
		}
	}
	if l := leftovers(t, dir); len(l) > 0 {
		t.Errorf("temporary files left: %v", l)
	}
}

// A write error that names the file already is not prefixed with it a
// second time ("write /dev/full: write /dev/full: ...").
func TestWriterErrorNamesFileOnce(t *testing.T) {
	if _, err := os.Stat("/dev/full"); err != nil {
		t.Skip("no /dev/full")
	}
	for _, comp := range []Compress{CompressNone, CompressGzip} {
		w, err := newWriter("/dev/full", comp, false, nil)
		if err != nil {
			t.Fatal(err)
		}
		if w.repl == nil || w.repl.Replaces() {
			t.Fatal("a device is written in place")
		}
		w.write([]byte(strings.Repeat("fog on the quay\n", 1<<15)))
		w.flush()
		err = w.finish(true)
		if err == nil || strings.Count(err.Error(), "/dev/full") != 1 || !strings.Contains(err.Error(), "no space left") {
			t.Errorf("compress %d: %v", comp, err)
		}
	}
}

// A Switch does not reopen an Output written without Append: the file
// appears whole at the end, and no second file is started.
func TestSwitchWithoutAppendKeepsOneFile(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "out.txt")
	sw := new(Switch)
	in := chatLog(3000, 9)
	want, _, _ := runString(t, Options{}, in)
	r := &switchingReader{s: in, sw: sw, at: len(in) / 2}
	if _, err := Run(context.Background(), Options{Tagger: newKeywordTagger(), Switch: sw, Output: out, BlockSize: 4096, Jobs: 1}, nil, r, nil); err != nil {
		t.Fatal(err)
	}
	if got, _ := os.ReadFile(out); string(got) != want {
		t.Errorf("%d bytes, want %d", len(got), len(want))
	}
	if l, _ := filepath.Glob(filepath.Join(dir, "*")); len(l) != 1 {
		t.Errorf("files: %v", l)
	}
}

// switchingReader gives s in small reads and calls sw.Set(nil) once when
// at bytes have been read.
type switchingReader struct {
	s   string
	off int
	at  int
	sw  *Switch
}

func (r *switchingReader) Read(p []byte) (int, error) {
	if r.off >= len(r.s) {
		return 0, io.EOF
	}
	n := copy(p[:min(len(p), 1000)], r.s[r.off:])
	if r.off < r.at && r.off+n >= r.at {
		r.sw.Set(nil)
	}
	r.off += n
	return n, nil
}

// Appending to a .gz or .zst file whose last member or frame was cut (a
// killed writer) is refused before anything is written; appending to a
// whole one gives a file that gzip -dc / zstd -dc (Debian's, the reference
// decoders) read to the end.
func TestAppendToCutCompressedFile(t *testing.T) {
	in := chatLog(2000, 3)
	want, _, _ := runString(t, Options{}, in)
	dir := t.TempDir()
	for _, c := range []struct{ name, tool string }{{"out.jsonl.gz", "gzip"}, {"out.jsonl.zst", "zstd"}} {
		path := filepath.Join(dir, c.name)
		run := func() error {
			_, err := Run(context.Background(), Options{Tagger: newKeywordTagger(), Output: path, Append: true}, nil, strings.NewReader(in), nil)
			return err
		}
		if err := run(); err != nil {
			t.Fatal(err)
		}
		whole, _ := os.ReadFile(path)
		if err := run(); err != nil {
			t.Fatalf("%s: append to a whole file: %v", c.name, err)
		}
		if _, err := exec.LookPath(c.tool); err != nil {
			if os.Getenv("CI") == "true" {
				t.Fatalf("%s is needed as the reference decoder", c.tool)
			}
		} else if got, err := exec.Command(c.tool, "-dc", path).Output(); err != nil || string(got) != want+want {
			t.Errorf("%s -dc after the append: %v, %d bytes, want %d", c.tool, err, len(got), 2*len(want))
		}
		for _, cutBy := range []int64{1, 4, int64(len(whole)) / 2} {
			os.WriteFile(path, whole, 0o644)
			if err := os.Truncate(path, int64(len(whole))-cutBy); err != nil {
				t.Fatal(err)
			}
			before, _ := os.ReadFile(path)
			err := run()
			if !errors.Is(err, ErrCutOutput) || !strings.Contains(err.Error(), path) {
				t.Errorf("%s cut by %d: err %v, want ErrCutOutput naming the file", c.name, cutBy, err)
			}
			if after, _ := os.ReadFile(path); string(after) != string(before) {
				t.Errorf("%s cut by %d: the file changed (%d bytes, was %d)", c.name, cutBy, len(after), len(before))
			}
		}
	}
}
