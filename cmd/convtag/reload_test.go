package main

import (
	"bytes"
	le "encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

// waitStderr waits until stderr holds want n times, failing after 10 s.
func (p *proc) waitStderr(t *testing.T, want string, n int) {
	t.Helper()
	for deadline := time.Now().Add(10 * time.Second); strings.Count(p.stderr.String(), want) < n; time.Sleep(2 * time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatalf("%q not %d times on stderr: %q", want, n, p.stderr.String())
		}
	}
}

// copyFile copies src to a new file dst.
// Truncating the mapped model in place (what `cp new current` or a
// truncating editor does first) under a running filter: the faulting worker
// ends the run with one line on stderr and exit 1, no goroutine dump, and
// the output holds only whole tagged records, every record tagged before
// the truncation among them.
func TestTagModelTruncatedInPlace(t *testing.T) {
	for _, jobs := range []string{"1", "2"} {
		t.Run("j"+jobs, func(t *testing.T) {
			dir := t.TempDir()
			orig := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
			m := filepath.Join(dir, "copy.safetensors")
			copyFile(t, orig, m)
			p := start(t, "tag", "-m", m, "--format", "text", "-j", jobs)
			for i := range 40 {
				fmt.Fprintf(p.in, "ferry line %d\n", i)
			}
			before := p.readLines(t, 40)
			if err := os.Truncate(m, 0); err != nil {
				t.Fatal(err)
			}
			for i := 40; i < 80; i++ {
				if _, err := fmt.Fprintf(p.in, "ferry line %d\n", i); err != nil {
					break // the filter has ended
				}
			}
			p.in.Close()
			rest, _ := io.ReadAll(p.out)
			p.cmd.Wait()
			stderr := p.stderr.String()
			if code := p.cmd.ProcessState.ExitCode(); code != exitFailure {
				t.Fatalf("exit %d, want %d (stderr %q)", code, exitFailure, stderr)
			}
			if strings.Contains(stderr, "goroutine ") || strings.Count(stderr, "\n") != 1 ||
				!strings.HasPrefix(stderr, "convtag: the model file changed under the running filter") ||
				!strings.Contains(stderr, "rename (mv)") {
				t.Fatalf("stderr, want one line naming the cause and the fix: %q", stderr)
			}
			if len(rest) > 0 && rest[len(rest)-1] != '\n' {
				t.Fatalf("output ends inside a line: %q", rest[max(0, len(rest)-80):])
			}
			lines := append(before, strings.SplitAfter(string(rest), "\n")...)
			for i, l := range lines {
				if l == "" {
					continue
				}
				tag, _, _ := strings.Cut(l, "\t")
				if tag != "crossing" && tag != "weather" || !strings.HasSuffix(l, fmt.Sprintf("\tferry line %d\n", i)) {
					t.Fatalf("line %d not a whole tagged record in order: %q", i, l)
				}
			}
		})
	}
}

// mappings counts the lines of /proc/PID/maps that map path (also once it
// is replaced: the kernel then adds " (deleted)").
func mappings(t *testing.T, pid int, path string) int {
	t.Helper()
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/maps", pid))
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, l := range strings.Split(string(b), "\n") {
		if strings.Contains(l, path) {
			n++
		}
	}
	return n
}

// 50 reloads, each of a new file renamed over the model path and with
// records tagged between them, leave at most two mappings of the model
// (the current one, and one whose last block may still be in flight)
// instead of one per reload. /proc/PID/maps is Linux's (proc(5)).
func TestTagReloadUnmapsReplacedModels(t *testing.T) {
	if runtime.GOOS != "linux" {
		t.Skip("counts mappings in /proc/PID/maps, which only Linux has")
	}
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	next := tagModel(t, dir, "next.safetensors", []string{"sea", "sky"}, 2)
	p := start(t, "tag", "-m", m, "--format", "text")
	fmt.Fprintf(p.in, "ferry line before\n")
	p.readLines(t, 1) // the filter is up: SIGHUP is now caught
	const reloads = 50
	for i := range reloads {
		tmp := filepath.Join(dir, "tmp"+strconv.Itoa(i))
		copyFile(t, next, tmp)
		if err := os.Rename(tmp, m); err != nil {
			t.Fatal(err)
		}
		p.cmd.Process.Signal(syscall.SIGHUP)
		p.waitStderr(t, "reloaded", i+1)
		fmt.Fprintf(p.in, "ferry line %d\n", i)
		if l := p.readLines(t, 1)[0]; !strings.HasPrefix(l, "sea\t") && !strings.HasPrefix(l, "sky\t") {
			t.Fatalf("line %d after reload %d: %q", i, i+1, l)
		}
	}
	if n := mappings(t, p.cmd.Process.Pid, m); n > 2 {
		t.Errorf("%d mappings of the model after %d reloads, want at most 2", n, reloads)
	}
	p.in.Close()
	if err := p.cmd.Wait(); err != nil {
		t.Fatalf("exit: %v (stderr %q)", err, p.stderr.String())
	}
}

// patchHeader rewrites the JSON header of the model file at path with f,
// padding it with spaces to a multiple of 8 bytes (safetensors' header is
// its 8-byte little-endian length, then that much JSON).
func patchHeader(t *testing.T, path string, f func(string) string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	n := le.LittleEndian.Uint64(b)
	h := f(string(b[8 : 8+n]))
	for len(h)%8 != 0 {
		h += " "
	}
	out := le.LittleEndian.AppendUint64(nil, uint64(len(h)))
	out = append(append(out, h...), b[8+n:]...)
	if err := os.WriteFile(path, out, 0o644); err != nil {
		t.Fatal(err)
	}
}

// setNaN writes a NaN over the last element of the F32 tensor name in the
// model file at path (not in the padding row, which Open checks), leaving
// the header and its checksum as they were.
func setNaN(t *testing.T, path, name string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	n := le.LittleEndian.Uint64(b)
	var hdr map[string]json.RawMessage
	if err := json.Unmarshal(b[8:8+n], &hdr); err != nil {
		t.Fatal(err)
	}
	var ti struct {
		Offsets [2]int `json:"data_offsets"`
	}
	if err := json.Unmarshal(hdr[name], &ti); err != nil {
		t.Fatal(err)
	}
	le.LittleEndian.PutUint32(b[8+int(n)+ti.Offsets[1]-4:], math.Float32bits(float32(math.NaN())))
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// A reload to a file that fails a check keeps the old model: the records
// after it get the very tags the same records got before it. The bad file
// has other labels, so a switch to it would show.
func TestTagReloadKeepsModelOnBadFile(t *testing.T) {
	for _, tc := range []struct {
		name  string
		spoil func(t *testing.T, path string)
	}{
		// token.Settings.Validate: max_tokens at most MaxTokensLimit.
		{"max_tokens out of range", func(t *testing.T, p string) {
			patchHeader(t, p, func(h string) string {
				return strings.Replace(h, `\"max_tokens\":0`, `\"max_tokens\":2000000`, 1)
			})
		}},
		{"truncated", func(t *testing.T, p string) {
			st, _ := os.Stat(p)
			os.Truncate(p, st.Size()/2)
		}},
		// Open does not read the fold tables; Verify finds the NaN (and the
		// checksum no longer matches). Tagging with it would give NaN scores.
		{"NaN in a fold table", func(t *testing.T, p string) { setNaN(t, p, "fold.0") }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
			bad := tagModel(t, dir, "bad.safetensors", []string{"sea", "sky"}, 2)
			tc.spoil(t, bad)
			p := start(t, "tag", "-m", m, "--format", "text")
			send := func() {
				for i := range 30 {
					fmt.Fprintf(p.in, "ferry %d in the fog at the harbour\n", i)
				}
			}
			send()
			first := p.readLines(t, 30)
			if err := os.Rename(bad, m); err != nil {
				t.Fatal(err)
			}
			p.cmd.Process.Signal(syscall.SIGHUP)
			p.waitStderr(t, "keeping the current model", 1)
			send()
			second := p.readLines(t, 30)
			p.in.Close()
			if err := p.cmd.Wait(); err != nil {
				t.Fatalf("exit: %v (stderr %q)", err, p.stderr.String())
			}
			if !bytes.Equal([]byte(strings.Join(first, "")), []byte(strings.Join(second, ""))) {
				t.Fatalf("tags changed after a rejected reload:\nbefore %q\nafter  %q", first[:3], second[:3])
			}
			if strings.Contains(p.stderr.String(), "reloaded") {
				t.Fatalf("stderr %q", p.stderr.String())
			}
		})
	}
}
