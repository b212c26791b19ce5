package stream

import (
	"bufio"
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"
)

// Header layouts from RFC 1952 section 2.3.1, RFC 8878 sections 3.1.1-3.1.2.
func TestSniffConfirmsHeaders(t *testing.T) {
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write([]byte("fog on the deck\n"))
	zw.Close()
	enc, _ := zstd.NewWriter(nil)
	frame := enc.EncodeAll([]byte("ferry one\n"), nil)
	frame2 := enc.EncodeAll([]byte("ferry two\n"), nil)
	skippable := append([]byte{0x5a, 0x2a, 0x4d, 0x18, 3, 0, 0, 0}, 'x', 'y', 'z')
	for _, c := range []struct{ name, in, want string }{
		{"text BZh", "BZh is how this line starts\n", "BZh is how this line starts\n"},
		{"text 1f 8b", "\x1f\x8b but not gzip\n", "\x1f\x8b but not gzip\n"},
		{"bom", "\xef\xbb\xbfferry\n", "ferry\n"},
		{"gzip padded", gz.String() + "\x00\x00\x00\x00", "fog on the deck\n"},
		{"zstd skippable first", string(skippable) + string(frame) + string(frame2), "ferry one\nferry two\n"},
	} {
		p := filepath.Join(t.TempDir(), "in")
		os.WriteFile(p, []byte(c.in), 0o644)
		in, err := openInput(p, nil, nil)
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		var got bytes.Buffer
		_, err = got.ReadFrom(in.r)
		in.closer()
		if err != nil || got.String() != c.want {
			t.Errorf("%s: got %q, %v; want %q", c.name, got.String(), err, c.want)
		}
	}
}

// pzstd (Debian's zstd package) begins every file with a skippable frame.
func TestPzstdOutput(t *testing.T) {
	if _, err := exec.LookPath("pzstd"); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("pzstd is needed: %v", err)
		}
		t.Log("pzstd not installed")
		return
	}
	data := []byte(chatLog(2000, 5))
	cmd := exec.Command("pzstd", "-q", "-c")
	cmd.Stdin = bytes.NewReader(data)
	z, err := cmd.Output()
	if err != nil {
		t.Fatal(err)
	}
	if z[0]&0xf0 != 0x50 {
		t.Fatalf("pzstd output does not begin with a skippable frame: % x", z[:4])
	}
	p := filepath.Join(t.TempDir(), "p")
	os.WriteFile(p, z, 0o644)
	in, err := openInput(p, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer in.closer()
	var got bytes.Buffer
	if _, err := got.ReadFrom(in.r); err != nil || !bytes.Equal(got.Bytes(), data) || in.kind != "zstd" {
		t.Fatalf("kind %q, %d bytes, %v", in.kind, got.Len(), err)
	}
}

// onceReader hands over its bytes in one Read and counts any Read after
// that: on an idle pipe such a Read would block until more input came.
type onceReader struct {
	b     []byte
	extra int
}

func (r *onceReader) Read(p []byte) (int, error) {
	if r.b == nil {
		r.extra++
		return 0, nil // like a pipe with nothing in it yet
	}
	n := copy(p, r.b)
	r.b = nil
	return n, nil
}

// A short plain line that begins like a header is decided on from the
// bytes that are there: sniffing must not ask the input for more.
func TestSniffDoesNotWaitOnPlainLines(t *testing.T) {
	for _, line := range []string{"P\n", "PA\n", "BZ\n", "BZh\n", "\x1f\n", "(\n"} {
		r := &onceReader{b: []byte(line)}
		br := bufio.NewReaderSize(r, 64<<10)
		br.Peek(1)
		if got := sniff(br); got != "" || r.extra != 0 {
			t.Errorf("%q: sniff = %q after %d further reads, want plain with none", line, got, r.extra)
		}
	}
}
