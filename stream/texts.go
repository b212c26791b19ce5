package stream

import (
	"bufio"
	"fmt"
	"io"
	"strings"
)

// TextOptions say how ScanTexts finds each record's text. The zero value
// takes each line as one text.
type TextOptions struct {
	// TextKeys are dotted paths to the text in a JSON record, as for
	// LabelledOptions; the values found are joined with a space. Empty
	// means plain lines: each line (without its line break) is the text.
	TextKeys []string
	// Report caps the Problems kept; 0 means 5, negative none.
	Report int
	// Stdin is read for the file name "-"; nil means os.Stdin.
	Stdin io.Reader
}

// TextStats count what ScanTexts saw in one pass.
type TextStats struct {
	Records  int64          // texts handed to fn
	Blank    int64          // empty lines, which are not records
	Skipped  int64          // JSON records that are malformed or have no text
	Problems []*RecordError // the first few skipped records, with why
}

// ScanTexts streams the texts of files ("-" is standard input), one after
// another, each plain or gzip/zstd/bzip2 compressed (sniffed from its first
// bytes), calling fn with each record's text in order. The slice passed to
// fn is valid only during the call. Only the current line is held in
// memory. A JSON record that is malformed or has no text under any key is
// counted in Skipped (the first few kept in Problems with file and line),
// never dropped silently. ScanTexts stops at the first error of fn, which
// it returns, or at an input that cannot be opened or read (an
// *InputError).
func ScanTexts(files []string, opt TextOptions, fn func(text []byte) error) (TextStats, error) {
	if opt.Report == 0 {
		opt.Report = 5
	}
	r := &textReader{opt: opt}
	for _, k := range opt.TextKeys {
		r.paths = append(r.paths, strings.Split(k, "."))
	}
	for _, name := range files {
		if err := r.file(name, fn); err != nil {
			return r.st, err
		}
	}
	return r.st, nil
}

type textReader struct {
	opt     TextOptions
	paths   [][]string
	st      TextStats
	scan    scanner
	line    []byte
	text    []byte
	scratch []byte
}

func (r *textReader) file(name string, fn func([]byte) error) error {
	in, err := openInput(name, r.opt.Stdin, nil)
	if err != nil {
		return &InputError{File: name, Err: err}
	}
	defer in.closer()
	br := bufio.NewReaderSize(in.r, 64<<10)
	var n int64
	for {
		b, err := br.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			r.line = append(r.line[:0], b...)
			for err == bufio.ErrBufferFull {
				b, err = br.ReadSlice('\n')
				r.line = append(r.line, b...)
			}
			b = r.line
		}
		if len(b) > 0 {
			n++
			if ferr := r.record(name, n, trimEOL(b), fn); ferr != nil {
				return ferr
			}
		}
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return &InputError{File: name, Line: n, Err: err}
		}
	}
}

func trimEOL(b []byte) []byte {
	if len(b) > 0 && b[len(b)-1] == '\n' {
		b = b[:len(b)-1]
	}
	if len(b) > 0 && b[len(b)-1] == '\r' {
		b = b[:len(b)-1]
	}
	return b
}

func (r *textReader) problem(file string, line int64, err error) {
	r.st.Skipped++
	if len(r.st.Problems) < r.opt.Report {
		r.st.Problems = append(r.st.Problems, &RecordError{File: file, Line: line, Err: err})
	}
}

func (r *textReader) record(file string, line int64, b []byte, fn func([]byte) error) error {
	if isBlank(b) {
		r.st.Blank++
		return nil
	}
	if len(r.paths) == 0 {
		r.st.Records++
		return fn(b)
	}
	if ok, e := r.scan.validObject(b); !ok {
		r.problem(file, line, fmt.Errorf("%w: %s at byte %d", ErrMalformed, e.msg, e.off+1))
		return nil
	}
	r.text = r.text[:0]
	found := false
	for _, path := range r.paths {
		s, e, ok, scratch := findPath(b, 0, path, r.scratch)
		r.scratch = scratch
		if !ok || string(b[s:e]) == "null" {
			continue
		}
		if b[s] != '"' {
			r.problem(file, line, fmt.Errorf("%w: %s", ErrNotString, strings.Join(path, ".")))
			return nil
		}
		if found {
			r.text = append(r.text, ' ')
		}
		r.text = appendUnescaped(r.text, b[s+1:e-1])
		found = true
	}
	if !found || isBlank(r.text) {
		r.problem(file, line, ErrNoText)
		return nil
	}
	r.st.Records++
	return fn(r.text)
}
