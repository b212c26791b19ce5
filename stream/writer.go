package stream

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"syscall"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"
)

// flusher is a compressor: gzip.Writer or zstd.Encoder.
type flusher interface {
	io.WriteCloser
	Flush() error
}

// writer is the end of the pipeline: a buffer, an optional compressor and
// the destination (the caller's writer, or a file it opens and can reopen).
// Its first error sticks: every later call returns it.
type writer struct {
	path string // "" means dst is the caller's writer
	comp Compress
	dst  io.Writer
	file *os.File
	sink *bufio.Writer // what reaches dst
	zw   flusher       // nil when uncompressed
	err  error
}

const writeBuffer = 256 << 10

// newWriter writes to the file path (truncated, or appended to when
// appendTo is set) or, when path is "" or "-", to stdout.
func newWriter(path string, comp Compress, appendTo bool, stdout io.Writer) (*writer, error) {
	w := &writer{comp: comp, dst: stdout}
	if path != "" && path != "-" {
		w.path = path
	}
	if w.comp == CompressAuto {
		w.comp = CompressNone
		switch {
		case w.path == "":
		case strings.HasSuffix(w.path, ".gz"):
			w.comp = CompressGzip
		case strings.HasSuffix(w.path, ".zst"):
			w.comp = CompressZstd
		}
	}
	mode := os.O_TRUNC
	if appendTo {
		mode = os.O_APPEND
	}
	if err := w.open(mode); err != nil {
		return nil, err
	}
	return w, nil
}

func (w *writer) open(mode int) error {
	if w.path != "" {
		f, err := os.OpenFile(w.path, os.O_WRONLY|os.O_CREATE|mode, 0o666)
		if err != nil {
			return fmt.Errorf("open output: %w", err)
		}
		w.file, w.dst = f, f
		if mode == os.O_APPEND && w.comp == CompressNone && !endsWithNewline(w.path) {
			// A run killed mid-write left part of a record: end that line
			// so the records appended now start on lines of their own.
			if _, err := f.Write([]byte{'\n'}); err != nil {
				f.Close()
				return fmt.Errorf("open output: %w", err)
			}
		}
	}
	if w.sink == nil {
		w.sink = bufio.NewWriterSize(w.dst, writeBuffer)
	} else {
		w.sink.Reset(w.dst)
	}
	switch w.comp {
	case CompressGzip:
		w.zw = gzip.NewWriter(w.sink)
	case CompressZstd:
		zw, err := zstd.NewWriter(w.sink, zstd.WithEncoderConcurrency(1))
		if err != nil {
			return fmt.Errorf("zstd: %w", err)
		}
		w.zw = zw
	}
	return nil
}

// endsWithNewline reports whether the file at path is empty, ends with a
// newline, or cannot be read (then nothing is added to it).
func endsWithNewline(path string) bool {
	f, err := os.Open(path)
	if err != nil {
		return true
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil || st.Size() == 0 || !st.Mode().IsRegular() {
		return true
	}
	var last [1]byte
	if _, err := f.ReadAt(last[:], st.Size()-1); err != nil {
		return true
	}
	return last[0] == '\n'
}

func (w *writer) fail(err error) error {
	if w.err == nil {
		if errors.Is(err, syscall.EPIPE) {
			err = fmt.Errorf("%w: %w", ErrOutputClosed, err)
		}
		w.err = fmt.Errorf("write %s: %w", w.name(), err)
	}
	return w.err
}

func (w *writer) name() string {
	if w.path == "" {
		return "output"
	}
	return w.path
}

func (w *writer) write(p []byte) error {
	if w.err != nil || len(p) == 0 {
		return w.err
	}
	var err error
	if w.zw != nil {
		_, err = w.zw.Write(p)
	} else {
		// p ends on a record boundary (it is a block's output): emptying
		// the buffer first when p does not fit keeps every write to the
		// destination on record boundaries too, so a process killed
		// mid-run leaves no partial line for the next one to append to.
		if len(p) > w.sink.Available() && w.sink.Buffered() > 0 {
			err = w.sink.Flush()
		}
		if err == nil {
			_, err = w.sink.Write(p)
		}
	}
	if err != nil {
		return w.fail(err)
	}
	return nil
}

// flush pushes everything written so far to the destination.
func (w *writer) flush() error {
	if w.err != nil {
		return w.err
	}
	if w.zw != nil {
		if err := w.zw.Flush(); err != nil {
			return w.fail(err)
		}
	}
	if err := w.sink.Flush(); err != nil {
		return w.fail(err)
	}
	return nil
}

// close ends the compressed stream, flushes and closes a file it opened.
func (w *writer) close() error {
	if w.err != nil {
		if w.file != nil {
			w.file.Close()
		}
		return w.err
	}
	if w.zw != nil {
		if err := w.zw.Close(); err != nil {
			return w.fail(err)
		}
	}
	if err := w.sink.Flush(); err != nil {
		return w.fail(err)
	}
	if w.file != nil {
		if err := w.file.Close(); err != nil {
			return w.fail(err)
		}
		w.file = nil
	}
	return nil
}

// reopen closes the output file and opens the same path again for
// appending (a log rotator may have moved the old one away). A compressed
// output gets a new gzip member or zstd frame, which readers take as one
// stream. It does nothing when writing to the caller's writer.
func (w *writer) reopen() error {
	if w.path == "" {
		return w.flush()
	}
	if err := w.close(); err != nil {
		return err
	}
	if err := w.open(os.O_APPEND); err != nil {
		w.err = err
		return err
	}
	return nil
}
