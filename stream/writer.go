package stream

import (
	"bufio"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
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
	path     string // "" means dst is the caller's writer
	comp     Compress
	appendTo bool
	dst      io.Writer
	file     *os.File
	repl     *OutputFile   // the file when not appending
	sink     *bufio.Writer // what reaches dst
	zw       flusher       // nil when uncompressed
	err      error
}

const writeBuffer = 256 << 10

// newWriter writes to the file path or, when path is "" or "-", to stdout.
// With appendTo it adds to the file in place; otherwise it writes an
// OutputFile, put in place by finish(true).
func newWriter(path string, comp Compress, appendTo bool, stdout io.Writer) (*writer, error) {
	w := &writer{comp: comp, dst: stdout, appendTo: appendTo}
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
	} else if w.path != "" {
		r, err := CreateOutputFile(w.path)
		if err != nil {
			return nil, fmt.Errorf("open output: %w", err)
		}
		w.repl, w.file, w.dst = r, r.f, r.f
		mode = 0
	}
	if err := w.open(mode); err != nil {
		if w.repl != nil {
			w.repl.Discard()
		}
		return nil, err
	}
	return w, nil
}

// open opens w.path with mode (os.O_TRUNC or os.O_APPEND; 0 when the
// temporary file is open already) and starts the compressor.
func (w *writer) open(mode int) error {
	if w.path != "" && mode != 0 {
		if mode == os.O_APPEND && w.comp != CompressNone {
			if err := checkWhole(w.path, w.comp); err != nil {
				return err
			}
		}
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

// fail makes err sticky. An *os.PathError names the file already (the
// temporary file's name is replaced by the file's own); any other error
// gets "write NAME:" in front.
func (w *writer) fail(err error) error {
	if w.err == nil {
		var pe *os.PathError
		if errors.As(err, &pe) {
			if w.repl != nil {
				err = w.repl.rename(err)
			}
		} else {
			err = fmt.Errorf("write %s: %w", w.name(), err)
		}
		if errors.Is(err, syscall.EPIPE) {
			err = fmt.Errorf("%w: %w", ErrOutputClosed, err)
		}
		w.err = err
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
// A temporary file is left open for finish.
func (w *writer) close() error {
	if w.repl != nil {
		w.file = nil
	}
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

// finish closes the output and, when it is an OutputFile, commits it when
// commit is set and discards it otherwise (a replaced file is then left as
// it was). It returns close's error, or the commit's.
func (w *writer) finish(commit bool) error {
	err := w.close()
	if w.repl == nil {
		return err
	}
	if err != nil || !commit {
		w.repl.Discard()
		return err
	}
	return w.repl.Commit()
}

// reopen closes the output file and opens the same path again for
// appending (a log rotator may have moved the old one away). A compressed
// output gets a new gzip member or zstd frame, which readers take as one
// stream. It only flushes when writing to the caller's writer or to a
// file opened without appendTo (which is not rotated: it appears at the
// end of the run, or is a device or FIFO).
func (w *writer) reopen() error {
	if w.path == "" || !w.appendTo {
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

// OutputFile is an output file that appears whole or not at all: a
// regular (or not yet existing) file is written under a temporary name in
// its directory, renamed onto it by Commit or removed by Discard, so the
// file is either as it was or wholly the new one. A symbolic link is
// followed: the file it points to is replaced. Anything else (a device, a
// FIFO) is written in place. Not safe for concurrent use.
type OutputFile struct {
	f         *os.File
	path, tmp string // tmp is "" when written in place
	done      bool
}

// CreateOutputFile opens path for writing as OutputFile describes. The
// temporary file is named ".convtag-XXXXXXXX-" and path's base name (so its
// suffix stays last) and has mode 0666 before the umask, or the permission
// bits of the file it replaces, which must be writable (an open for writing
// checks that, without truncating it).
func CreateOutputFile(path string) (*OutputFile, error) {
	target := path
	if t, err := filepath.EvalSymlinks(path); err == nil {
		target = t
	}
	var perm os.FileMode
	replacing := false
	if st, err := os.Stat(target); err == nil {
		if !st.Mode().IsRegular() {
			f, err := os.OpenFile(target, os.O_WRONLY|os.O_TRUNC, 0)
			if err != nil {
				return nil, err
			}
			return &OutputFile{f: f, path: path}, nil
		}
		f, err := os.OpenFile(target, os.O_WRONLY, 0)
		if err != nil {
			return nil, err
		}
		f.Close()
		perm, replacing = st.Mode().Perm(), true
	}
	dir, base := filepath.Split(target)
	var rnd [4]byte
	for range 100 {
		rand.Read(rnd[:])
		tmp := filepath.Join(dir, ".convtag-"+hex.EncodeToString(rnd[:])+"-"+base)
		f, err := os.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o666)
		if errors.Is(err, os.ErrExist) {
			continue
		}
		if err != nil {
			var pe *os.PathError
			if errors.As(err, &pe) {
				err = pe.Err
			}
			return nil, fmt.Errorf("%s: create a temporary file beside it: %w", path, err)
		}
		if replacing {
			if err := f.Chmod(perm); err != nil {
				f.Close()
				os.Remove(tmp)
				return nil, err
			}
		}
		return &OutputFile{f: f, path: target, tmp: tmp}, nil
	}
	return nil, fmt.Errorf("create a temporary file beside %s: too many name clashes", path)
}

// Replaces reports whether f is written under a temporary name (and so
// the file is left as it was unless Commit is called).
func (f *OutputFile) Replaces() bool { return f.tmp != "" }

// Write writes to the file; its errors name the file, never the
// temporary name.
func (f *OutputFile) Write(p []byte) (int, error) {
	n, err := f.f.Write(p)
	return n, f.rename(err)
}

func (f *OutputFile) rename(err error) error {
	var pe *os.PathError
	if f.tmp != "" && errors.As(err, &pe) && pe.Path == f.tmp {
		return &os.PathError{Op: pe.Op, Path: f.path, Err: pe.Err}
	}
	return err
}

// Commit syncs and closes the temporary file and renames it onto the file
// (or closes a file written in place). On an error the temporary file is
// removed and the file left as it was. It does nothing a second time.
func (f *OutputFile) Commit() error {
	if f.done {
		return nil
	}
	f.done = true
	if f.tmp == "" {
		return f.f.Close()
	}
	err := f.f.Sync()
	if cerr := f.f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(f.tmp, f.path)
	}
	if err != nil {
		os.Remove(f.tmp)
		return fmt.Errorf("write %s: %w", f.path, errors.Unwrap(err))
	}
	return nil
}

// Discard closes the file and removes the temporary file; the file stays
// as it was. It does nothing after Commit.
func (f *OutputFile) Discard() {
	if f.done {
		return
	}
	f.done = true
	f.f.Close()
	if f.tmp != "" {
		os.Remove(f.tmp)
	}
}

// checkWhole decodes the compressed file at path to its end, so that
// records are never appended after a gzip member or zstd frame that a
// killed writer left cut (readers would stop there, at the earliest). An
// empty or missing file is fine.
func checkWhole(path string, comp Compress) error {
	f, err := os.Open(path)
	if err != nil {
		return nil // the open for appending reports it, or creates the file
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() || st.Size() == 0 {
		return nil
	}
	br := bufio.NewReaderSize(f, 64<<10)
	var r io.Reader
	kind := "gzip"
	switch comp {
	case CompressGzip:
		zr, err := gzip.NewReader(br)
		if err != nil {
			return appendErr(path, kind, err)
		}
		r = zr
	case CompressZstd:
		kind = "zstd"
		zr, err := zstd.NewReader(br, zstd.WithDecoderConcurrency(1))
		if err != nil {
			return appendErr(path, kind, err)
		}
		defer zr.Close()
		r = zr
	default:
		return nil
	}
	if _, err := io.Copy(io.Discard, r); err != nil {
		return appendErr(path, kind, err)
	}
	return nil
}

func appendErr(path, kind string, err error) error {
	return fmt.Errorf("append to %s: %w (%s: %v); nothing was written to it", path, ErrCutOutput, kind, err)
}
