package stream

import (
	"bufio"
	"bytes"
	"compress/bzip2"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"
)

// Compression kinds, sniffed from an input's first bytes (never from its
// name). A magic alone is not enough, since a text line may begin with the
// same bytes; the header bytes after it must fit too:
//   - gzip (RFC 1952 section 2.3.1): 1f 8b, compression method 8 (deflate),
//     then a flags byte whose reserved bits 5-7 are zero;
//   - zstd (RFC 8878 sections 3.1.1 and 3.1.2): the frame magic 28 b5 2f fd,
//     or a skippable frame's magic 0x184D2A50..0x184D2A5F (little-endian:
//     5? 2a 4d 18), which is how a file written in parallel begins;
//   - bzip2: "BZh", a block-size digit '1'..'9', then the 48-bit magic of
//     a compressed block (31 41 59 26 53 59) or of the end of the stream
//     (17 72 45 38 50 90, an empty input).
var (
	magicZstd      = []byte{0x28, 0xb5, 0x2f, 0xfd}
	magicBzipBlock = []byte{0x31, 0x41, 0x59, 0x26, 0x53, 0x59}
	magicBzipEnd   = []byte{0x17, 0x72, 0x45, 0x38, 0x50, 0x90}
	bom            = []byte{0xef, 0xbb, 0xbf}
)

// sniff returns the compression br's bytes start with, or "" for plain
// bytes. It asks for one more byte only while the bytes so far could still
// be a header, so a short plain line on an idle pipe ("P", "BZ") is not held
// back waiting for input that may not come.
func sniff(br *bufio.Reader) string {
	head, _ := br.Peek(1)
	if len(head) == 0 {
		return ""
	}
	switch head[0] {
	case 0x1f:
		if h, ok := peekPrefix(br, []byte{0x1f, 0x8b, 8}, 4); ok && h[3]&0xe0 == 0 {
			return "gzip"
		}
	case 0x28:
		if _, ok := peekPrefix(br, magicZstd, 4); ok {
			return "zstd"
		}
	case 'B':
		if h, ok := peekPrefix(br, []byte("BZh"), 4); !ok || h[3] < '1' || h[3] > '9' {
			return ""
		}
		if h, _ := br.Peek(10); len(h) == 10 && (bytes.Equal(h[4:], magicBzipBlock) || bytes.Equal(h[4:], magicBzipEnd)) {
			return "bzip2"
		}
	default:
		if head[0]&0xf0 == 0x50 {
			if _, ok := peekPrefix(br, []byte{head[0], 0x2a, 0x4d, 0x18}, 4); ok {
				return "zstd"
			}
		}
	}
	return ""
}

// peekPrefix peeks at br byte by byte while its bytes equal prefix, then
// peeks n bytes in all (n >= len(prefix)). It reports them and whether all
// n were there with prefix first; it stops at the first byte that differs.
func peekPrefix(br *bufio.Reader, prefix []byte, n int) ([]byte, bool) {
	for i := 2; i <= len(prefix); i++ {
		h, _ := br.Peek(i)
		if len(h) < i || h[i-1] != prefix[i-1] {
			return nil, false
		}
	}
	h, _ := br.Peek(n)
	return h, len(h) == n
}

// skipBOM returns r without a UTF-8 byte-order mark at its start.
func skipBOM(r io.Reader) io.Reader {
	br, ok := r.(*bufio.Reader)
	if !ok {
		br = bufio.NewReaderSize(r, 64<<10)
	}
	if h, _ := br.Peek(1); len(h) == 1 && h[0] == bom[0] {
		if h, _ := br.Peek(3); bytes.Equal(h, bom) {
			br.Discard(3)
		}
	}
	return br
}

// gzipMembers reads the gzip members of a file one after another. After the
// last one, bytes that are all zero (the padding some tape and block-device
// tools add, which gzip itself ignores) are the end of the input; any other
// trailing bytes are an error.
type gzipMembers struct {
	zr   *gzip.Reader
	br   *bufio.Reader
	done bool
}

var errGzipTrailing = errors.New("bytes after the last gzip member are not a gzip member")

func (g *gzipMembers) Read(p []byte) (int, error) {
	if g.done {
		return 0, io.EOF
	}
	for {
		n, err := g.zr.Read(p)
		if err != io.EOF {
			return n, err
		}
		if n > 0 {
			return n, nil // the next Read sees the member's end again
		}
		h, _ := g.br.Peek(1)
		switch {
		case len(h) == 0:
			g.done = true
			return 0, io.EOF
		case h[0] == 0:
			for {
				c, err := g.br.ReadByte()
				if err == io.EOF {
					g.done = true
					return 0, io.EOF
				}
				if err != nil {
					return 0, err
				}
				if c != 0 {
					return 0, errGzipTrailing
				}
			}
		}
		if err := g.zr.Reset(g.br); err != nil {
			return 0, err
		}
		g.zr.Multistream(false)
	}
}

// input is one opened input: its decoded bytes and what to close.
type input struct {
	r      io.Reader
	kind   string // "", "gzip", "zstd" or "bzip2"
	closer func()
}

// countReader reports how many raw (possibly compressed) bytes were read.
type countReader struct {
	r      io.Reader
	onRead func(int)
}

func (c *countReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	if n > 0 {
		c.onRead(n)
	}
	return n, err
}

// openInput opens name ("-" is stdin, which is not closed) and wraps it in
// the decompressor its first bytes call for. Several gzip members or zstd
// frames in one file are read as one stream.
func openInput(name string, stdin io.Reader, onRead func(int)) (*input, error) {
	var r io.Reader
	in := &input{closer: func() {}}
	if name == "-" {
		if stdin == nil {
			stdin = os.Stdin
		}
		r = stdin
	} else {
		f, err := os.Open(name)
		if err != nil {
			return nil, err
		}
		if st, err := f.Stat(); err == nil && st.IsDir() {
			f.Close()
			return nil, errors.New("is a directory")
		}
		r = f
		in.closer = func() { f.Close() }
	}
	if onRead != nil {
		r = &countReader{r: r, onRead: onRead}
	}
	br := bufio.NewReaderSize(r, 64<<10)
	switch sniff(br) {
	case "gzip":
		zr, err := gzip.NewReader(br)
		if err != nil {
			in.closer()
			return nil, fmt.Errorf("%w (%s)", ErrTruncated, decoderSays("gzip", err))
		}
		zr.Multistream(false)
		in.r, in.kind = skipBOM(&gzipMembers{zr: zr, br: br}), "gzip"
	case "zstd":
		zr, err := zstd.NewReader(br, zstd.WithDecoderConcurrency(1))
		if err != nil {
			in.closer()
			return nil, fmt.Errorf("zstd: %w", err)
		}
		c := in.closer
		in.r, in.kind, in.closer = skipBOM(zr), "zstd", func() { zr.Close(); c() }
	case "bzip2":
		in.r, in.kind = skipBOM(bzip2.NewReader(br)), "bzip2"
	default:
		in.r = skipBOM(br)
	}
	return in, nil
}

// chunk is a piece of one input's decoded bytes, in order. The last chunk of
// an input has eof set, and err when the input failed (it could not be
// opened, or a compressed input ended early or was corrupt).
type chunk struct {
	buf  []byte // from the chunk pool; nil when there is no data
	file int
	eof  bool
	err  error
}

const chunkSize = 128 << 10

// readInputs reads every input in turn into chunks and closes out at the
// end. It returns early when quit is closed; a Read that blocks (an idle
// pipe) delays that until the Read returns.
func readInputs(names []string, stdin io.Reader, onRead func(int), shard Shard, pool chan []byte, out chan<- chunk, quit <-chan struct{}) {
	defer close(out)
	send := func(c chunk) bool {
		select {
		case out <- c:
			return true
		case <-quit:
			return false
		}
	}
	for i, name := range names {
		var in *input
		var err error
		if shard.N > 0 {
			in, err = openShard(name, shard)
			if err == nil && onRead != nil {
				in.r = &countReader{r: in.r, onRead: onRead}
			}
		} else {
			in, err = openInput(name, stdin, onRead)
		}
		if err != nil {
			if !send(chunk{file: i, eof: true, err: err}) {
				return
			}
			continue
		}
		ok := readOne(in, i, pool, send, quit)
		in.closer()
		if !ok {
			return
		}
	}
}

func readOne(in *input, file int, pool chan []byte, send func(chunk) bool, quit <-chan struct{}) bool {
	for {
		var buf []byte
		select {
		case buf = <-pool:
		case <-quit:
			return false
		}
		n, err := in.r.Read(buf[:cap(buf)])
		if n > 0 {
			if !send(chunk{buf: buf[:n], file: file}) {
				return false
			}
		} else {
			pool <- buf
		}
		if err == io.EOF {
			return send(chunk{file: file, eof: true})
		}
		if err != nil {
			if in.kind != "" {
				err = fmt.Errorf("%w (%s)", ErrTruncated, decoderSays(in.kind, err))
			} else {
				err = fmt.Errorf("read: %w", err)
			}
			return send(chunk{file: file, eof: true, err: err})
		}
	}
}

// decoderSays words a decoder's error as "kind: message", once: the
// decoders' own messages often start with their name already
// ("gzip: invalid checksum").
func decoderSays(kind string, err error) string {
	msg := err.Error()
	if strings.HasPrefix(msg, kind+": ") {
		return msg
	}
	return kind + ": " + msg
}
