package stream

import (
	"bufio"
	"bytes"
	"compress/bzip2"
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"
)

// Compression kinds, sniffed from an input's first bytes (never from its
// name): gzip (RFC 1952) starts with 1f 8b, zstd (RFC 8878) with the frame
// magic 28 b5 2f fd, bzip2 with "BZh".
var (
	magicGzip  = []byte{0x1f, 0x8b}
	magicZstd  = []byte{0x28, 0xb5, 0x2f, 0xfd}
	magicBzip2 = []byte("BZh")
)

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
	head, _ := br.Peek(4)
	switch {
	case bytes.HasPrefix(head, magicGzip):
		zr, err := gzip.NewReader(br)
		if err != nil {
			in.closer()
			return nil, fmt.Errorf("%w (gzip: %v)", ErrTruncated, err)
		}
		in.r, in.kind = zr, "gzip"
	case bytes.HasPrefix(head, magicZstd):
		zr, err := zstd.NewReader(br, zstd.WithDecoderConcurrency(1))
		if err != nil {
			in.closer()
			return nil, fmt.Errorf("zstd: %w", err)
		}
		c := in.closer
		in.r, in.kind, in.closer = zr, "zstd", func() { zr.Close(); c() }
	case bytes.HasPrefix(head, magicBzip2):
		in.r, in.kind = bzip2.NewReader(br), "bzip2"
	default:
		in.r = br
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
func readInputs(names []string, stdin io.Reader, onRead func(int), pool chan []byte, out chan<- chunk, quit <-chan struct{}) {
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
		in, err := openInput(name, stdin, onRead)
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
				err = fmt.Errorf("%w (%s: %v)", ErrTruncated, in.kind, err)
			} else {
				err = fmt.Errorf("read: %w", err)
			}
			return send(chunk{file: file, eof: true, err: err})
		}
	}
}
