package stream

import (
	"bytes"
	"compress/bzip2"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"
)

// TestOpenDecodes: Open gives the same bytes for a plain, gzip, zstd and
// bzip2 file. The bzip2 file is written by Debian's bzip2 tool (the
// standard library only decodes bzip2); without it that case is skipped
// outside CI.
func TestOpenDecodes(t *testing.T) {
	dir := t.TempDir()
	want := []byte("3 2\nferry 0.1 0.2\nquay 0.3 0.4\ntide 0.5 0.6\n")
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write(want)
	zw.Close()
	enc, _ := zstd.NewWriter(nil)
	files := map[string]string{
		"plain": write("v.txt", want),
		"gzip":  write("v.txt.gz", gz.Bytes()),
		"zstd":  write("v.txt.zst", enc.EncodeAll(want, nil)),
		"bom":   write("v.bom.txt", append([]byte{0xef, 0xbb, 0xbf}, want...)),
	}
	if bz, err := exec.LookPath("bzip2"); err == nil {
		p := write("v.txt", want)
		if out, err := exec.Command(bz, "-kf", p).CombinedOutput(); err != nil {
			t.Fatalf("bzip2: %v: %s", err, out)
		}
		files["bzip2"] = p + ".bz2"
		// The tool's output is real bzip2: the standard library reads it.
		f, _ := os.Open(p + ".bz2")
		b, err := io.ReadAll(bzip2.NewReader(f))
		f.Close()
		if err != nil || !bytes.Equal(b, want) {
			t.Fatalf("compress/bzip2 reads %q, %v", b, err)
		}
	} else if os.Getenv("CI") != "" {
		t.Fatal("bzip2 is not installed (Debian package bzip2)")
	}
	for kind, p := range files {
		r, err := Open(p, nil)
		if err != nil {
			t.Fatalf("%s: %v", kind, err)
		}
		got, err := io.ReadAll(r)
		r.Close()
		if err != nil || !bytes.Equal(got, want) {
			t.Errorf("%s: read %q, %v", kind, got, err)
		}
	}
	if _, err := Open(filepath.Join(dir, "missing"), nil); !os.IsNotExist(err) {
		t.Errorf("missing file: %v", err)
	}
	r, err := Open("-", bytes.NewReader(gz.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	if got, _ := io.ReadAll(r); !bytes.Equal(got, want) {
		t.Errorf("stdin: %q", got)
	}
}

// TestDecoderErrorsNameTheFormatOnce: a corrupt gzip member says "gzip:"
// once, not "gzip: gzip: invalid checksum". The CRC-32 at the end of the
// member (RFC 1952 section 2.3.1) is flipped.
func TestDecoderErrorsNameTheFormatOnce(t *testing.T) {
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write([]byte("a line\n"))
	zw.Close()
	b := gz.Bytes()
	b[len(b)-8] ^= 0xff
	var seen []error
	_, err := Run(t.Context(), Options{Tagger: nullTagger{}, OnError: func(e error) { seen = append(seen, e) }}, []string{"-"}, bytes.NewReader(b), io.Discard)
	if len(seen) > 0 {
		err = seen[0]
	}
	if err == nil {
		t.Fatal("a corrupt gzip member read without error")
	}
	if msg := err.Error(); strings.Count(msg, "gzip") != 1 {
		t.Errorf("error %q names gzip %d times", msg, strings.Count(msg, "gzip"))
	}
}
