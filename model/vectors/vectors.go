package vectors

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"unsafe"
)

// Limits on what Read accepts.
const (
	// MaxDim is the largest vector dimension Read accepts.
	MaxDim = 1 << 16
	// MaxWordBytes is the longest word, in bytes, Read and the writers
	// accept.
	MaxWordBytes = 1 << 12
	// MaxCount is the largest count a header may give.
	MaxCount = 1<<31 - 1
)

// Sentinel errors; a *ParseError unwraps to one of them. Read never
// returns them bare, so each printed message still carries the package
// prefix and the position.
var (
	ErrHeader    = errors.New("bad header")
	ErrCount     = errors.New("count does not match the vectors")
	ErrDim       = errors.New("wrong number of values")
	ErrValue     = errors.New("bad value")
	ErrWord      = errors.New("bad word")
	ErrDuplicate = errors.New("duplicate word")
	ErrTooLong   = errors.New("line too long")
)

// ParseError is a problem at one place in a vector file.
type ParseError struct {
	// Line is 1-based: the header is line 1 and the i-th vector (from 1)
	// is line i+1. In a binary file Line counts records the same way.
	Line int
	// Offset is the byte offset where the line or record starts.
	Offset int64
	// Binary says the file was being read as the binary format.
	Binary bool
	Err    error
}

func (e *ParseError) Error() string {
	if e.Binary && e.Line > 1 {
		return fmt.Sprintf("vectors: binary vector %d (byte %d): %v", e.Line-1, e.Offset, e.Err)
	}
	return fmt.Sprintf("vectors: line %d: %v", e.Line, e.Err)
}

func (e *ParseError) Unwrap() error { return e.Err }

// Format is a vector file format.
type Format int

// The formats. Auto is only meaningful to ReadFormat.
const (
	Auto Format = iota
	Text
	Binary
)

func (f Format) String() string {
	switch f {
	case Auto:
		return "auto"
	case Text:
		return "text"
	case Binary:
		return "binary"
	}
	return "Format(" + strconv.Itoa(int(f)) + ")"
}

// Set is a list of words with one vector each.
type Set struct {
	// Words are distinct, non-empty, at most MaxWordBytes long, and free of
	// spaces, tabs, CR and LF (the formats cannot carry those).
	Words []string
	// Dim is the length of every vector, 1..MaxDim.
	Dim int
	// Vecs holds the vectors one after another: word i's vector is
	// Vecs[i*Dim : (i+1)*Dim]. Values are finite.
	Vecs []float32
}

// Len is the number of words.
func (s *Set) Len() int { return len(s.Words) }

// Vec returns word i's vector; the slice aliases s.Vecs.
func (s *Set) Vec(i int) []float32 { return s.Vecs[i*s.Dim : (i+1)*s.Dim : (i+1)*s.Dim] }

// Index returns a new map from each word to its position.
func (s *Set) Index() map[string]int {
	m := make(map[string]int, len(s.Words))
	for i, w := range s.Words {
		m[w] = i
	}
	return m
}

// Read reads a vector file in either format, telling them apart from the
// bytes after the first word: the text format is assumed when every byte
// up to the first newline, within the first 4·Dim bytes, could belong to a
// line of decimal numbers (digits, signs, '.', 'e', blanks, and the letters
// of "nan" and "inf") and includes a digit; otherwise binary. The raw
// float32 bytes of a real vector almost never pass that test: the top byte
// of any float32 of magnitude between 1e-3 and 1e3 is one of ':' to 'D'
// (or their counterparts with the sign bit set), none of which a decimal
// line holds. ReadFormat forces a format for the rare file that fools it.
func Read(r io.Reader) (*Set, error) { return ReadFormat(r, Auto) }

// ReadFormat is Read with the format given; Auto sniffs as Read does.
func ReadFormat(r io.Reader, f Format) (*Set, error) {
	rd := &reader{br: bufio.NewReaderSize(r, 64<<10)}
	count, dim, err := rd.header()
	if err != nil {
		return nil, err
	}
	if need := MaxWordBytes + 4*dim + 64; need > rd.br.Size() {
		rd.br = bufio.NewReaderSize(rd.br, need)
	}
	s := &Set{Dim: dim, Vecs: make([]float32, 0, min(count*dim, 1<<20))}
	if count == 0 {
		return s, rd.trailing(0, f == Binary)
	}
	if f == Auto {
		f = rd.sniff(dim)
	}
	switch f {
	case Text:
		err = rd.text(s, count)
	case Binary:
		err = rd.binary(s, count)
	default:
		return nil, fmt.Errorf("vectors: unknown format %d", int(f))
	}
	if err != nil {
		return nil, err
	}
	return s, nil
}

type reader struct {
	br   *bufio.Reader
	off  int64  // bytes consumed so far
	line int    // lines (records) consumed so far
	buf  []byte // a line that spans buffer refills
	seen map[string]int
}

func (rd *reader) errAt(line int, off int64, binary bool, err error) error {
	return &ParseError{Line: line, Offset: off, Binary: binary, Err: err}
}

// readLine returns the next line without its newline, or io.EOF when no
// bytes are left. A last line without a newline is returned as a line. The
// slice is valid until the next call.
func (rd *reader) readLine(limit int) ([]byte, error) {
	rd.buf = rd.buf[:0]
	for {
		b, err := rd.br.ReadSlice('\n')
		rd.off += int64(len(b))
		if len(rd.buf)+len(b) > limit+1 {
			return nil, ErrTooLong
		}
		switch {
		case err == nil:
			if len(rd.buf) == 0 {
				return b[:len(b)-1], nil
			}
			rd.buf = append(rd.buf, b...)
			return rd.buf[:len(rd.buf)-1], nil
		case err == bufio.ErrBufferFull:
			rd.buf = append(rd.buf, b...)
		case err == io.EOF:
			rd.buf = append(rd.buf, b...)
			if len(rd.buf) == 0 {
				return nil, io.EOF
			}
			return rd.buf, nil
		default:
			return nil, err
		}
	}
}

func (rd *reader) header() (count, dim int, err error) {
	line, err := rd.readLine(256)
	rd.line = 1
	bad := func(format string, a ...any) error {
		return rd.errAt(1, 0, false, fmt.Errorf("%w: %s", ErrHeader, fmt.Sprintf(format, a...)))
	}
	switch {
	case err == io.EOF:
		return 0, 0, bad("empty file; want a first line \"count dim\"")
	case err == ErrTooLong:
		return 0, 0, bad("first line longer than 256 bytes; want \"count dim\" (a file without that header line needs one added)")
	case err != nil:
		return 0, 0, fmt.Errorf("vectors: %w", err)
	}
	f := bytes.Fields(line)
	if len(f) != 2 {
		return 0, 0, bad("%q has %d fields; want \"count dim\" (a file without that header line needs one added)", clip(line), len(f))
	}
	count, err1 := strconv.Atoi(string(f[0]))
	dim, err2 := strconv.Atoi(string(f[1]))
	switch {
	case err1 != nil || count < 0 || count > MaxCount:
		return 0, 0, bad("count %q is not an integer in 0..%d", clip(f[0]), MaxCount)
	case err2 != nil || dim < 1 || dim > MaxDim:
		return 0, 0, bad("dimension %q is not an integer in 1..%d", clip(f[1]), MaxDim)
	}
	return count, dim, nil
}

// textByte marks the bytes a line of decimal numbers may hold.
var textByte = func() (t [256]bool) {
	for _, c := range []byte("0123456789+-.eE \t\rnaifty NIF") {
		t[c] = true
	}
	return t
}()

// sniff decides the format from the bytes after the first word (see Read).
// It consumes nothing.
func (rd *reader) sniff(dim int) Format {
	p, _ := rd.br.Peek(rd.br.Size())
	j := bytes.IndexAny(p, " \t\n")
	if j < 0 || p[j] == '\n' || j > MaxWordBytes {
		return Text // the text reader reports what is wrong with the line
	}
	w := p[j+1 : min(len(p), j+1+4*dim)]
	if k := bytes.IndexByte(w, '\n'); k >= 0 {
		w = w[:k]
	}
	digit := false
	for _, c := range w {
		if !textByte[c] {
			return Binary
		}
		digit = digit || c >= '0' && c <= '9'
	}
	if !digit {
		return Binary
	}
	return Text
}

func blank(c byte) bool { return c == ' ' || c == '\t' || c == '\r' }

// checkWord reports what makes w unusable as a word, or nil.
func checkWord(w []byte) error {
	if len(w) == 0 {
		return fmt.Errorf("%w: empty word", ErrWord)
	}
	if len(w) > MaxWordBytes {
		return fmt.Errorf("%w: word of %d bytes, longer than %d", ErrWord, len(w), MaxWordBytes)
	}
	if i := bytes.IndexAny(w, " \t\r\n"); i >= 0 {
		return fmt.Errorf("%w: word %q contains a blank or line break", ErrWord, clip(w))
	}
	return nil
}

func (rd *reader) addWord(w []byte) error {
	if rd.seen == nil {
		rd.seen = map[string]int{}
	}
	s := string(w)
	if first, ok := rd.seen[s]; ok {
		return fmt.Errorf("%w %q (first on line %d)", ErrDuplicate, clip(w), first)
	}
	rd.seen[s] = rd.line
	return nil
}

func (rd *reader) text(s *Set, count int) error {
	d := s.Dim
	limit := MaxWordBytes + 64*d + 64
	for n := 0; n < count; n++ {
		start := rd.off
		line, err := rd.readLine(limit)
		rd.line++
		bad := func(err error) error { return rd.errAt(rd.line, start, false, err) }
		switch {
		case err == io.EOF:
			return bad(fmt.Errorf("%w: file ends after %d of the header's %d vectors", ErrCount, n, count))
		case err == ErrTooLong:
			return bad(fmt.Errorf("%w: longer than %d bytes", ErrTooLong, limit))
		case err != nil:
			return fmt.Errorf("vectors: line %d: %w", rd.line, err)
		}
		for len(line) > 0 && blank(line[len(line)-1]) {
			line = line[:len(line)-1]
		}
		end := bytes.IndexAny(line, " \t")
		if end < 0 {
			if len(line) == 0 {
				return bad(fmt.Errorf("%w: empty line where vector %d of %d should be", ErrCount, n+1, count))
			}
			return bad(fmt.Errorf("%w: word %q has no values, want %d", ErrDim, clip(line), d))
		}
		word := line[:end]
		if err := checkWord(word); err != nil {
			return bad(err)
		}
		if err := rd.addWord(word); err != nil {
			return bad(err)
		}
		have := 0
		rest := line[end:]
		for {
			for len(rest) > 0 && blank(rest[0]) {
				rest = rest[1:]
			}
			if len(rest) == 0 {
				break
			}
			e := 0
			for e < len(rest) && !blank(rest[e]) {
				e++
			}
			field := rest[:e]
			rest = rest[e:]
			have++
			if have > d {
				continue // counted for the message below
			}
			// The string view is only read by ParseFloat, which copies
			// anything it keeps (into its errors), and we drop its error.
			v, err := strconv.ParseFloat(unsafe.String(&field[0], len(field)), 32)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				return bad(fmt.Errorf("%w: value %d of %q, %q, is not a finite float32", ErrValue, have, clip(word), clip(field)))
			}
			s.Vecs = append(s.Vecs, float32(v))
		}
		if have != d {
			return bad(fmt.Errorf("%w: %q has %d values, want %d", ErrDim, clip(word), have, d))
		}
		s.Words = append(s.Words, string(word))
	}
	return rd.trailing(count, false)
}

// trailing checks that nothing but blank lines follows the last vector.
func (rd *reader) trailing(count int, binary bool) error {
	for {
		start := rd.off
		line, err := rd.readLine(MaxWordBytes + 64*MaxDim)
		if err == io.EOF {
			return nil
		}
		rd.line++
		if err != nil && err != ErrTooLong {
			return fmt.Errorf("vectors: line %d: %w", rd.line, err)
		}
		if err == ErrTooLong || len(bytes.Trim(line, " \t\r")) > 0 {
			return rd.errAt(rd.line, start, binary, fmt.Errorf("%w: more data after the header's %d vectors", ErrCount, count))
		}
	}
}

func (rd *reader) binary(s *Set, count int) error {
	d := s.Dim
	raw := make([]byte, 4*d)
	for n := 0; n < count; n++ {
		start := rd.off
		rd.line++
		bad := func(err error) error { return rd.errAt(rd.line, start, true, err) }
		if n > 0 {
			// The newline after the previous vector is optional.
			if b, err := rd.br.Peek(1); err == nil && b[0] == '\n' {
				rd.br.Discard(1)
				rd.off++
				start++
			}
		}
		w, err := rd.br.ReadSlice(' ')
		rd.off += int64(len(w))
		switch {
		case err == io.EOF:
			if len(w) == 0 {
				return bad(fmt.Errorf("%w: file ends after %d of the header's %d vectors", ErrCount, n, count))
			}
			return bad(fmt.Errorf("%w: file ends inside word %q", ErrCount, clip(w)))
		case err == bufio.ErrBufferFull:
			return bad(fmt.Errorf("%w: no space within %d bytes", ErrWord, len(w)))
		case err != nil:
			return fmt.Errorf("vectors: binary vector %d: %w", n+1, err)
		}
		w = w[:len(w)-1]
		if err := checkWord(w); err != nil {
			return bad(err)
		}
		if err := rd.addWord(w); err != nil {
			return bad(err)
		}
		word := string(w)
		got, err := io.ReadFull(rd.br, raw)
		rd.off += int64(got)
		if err != nil {
			return bad(fmt.Errorf("%w: file ends inside the vector of %q (%d of %d bytes)", ErrCount, clip(w), got, len(raw)))
		}
		for i := range d {
			v := math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
			if f := float64(v); math.IsNaN(f) || math.IsInf(f, 0) {
				return bad(fmt.Errorf("%w: value %d of %q is %v", ErrValue, i+1, clip(w), v))
			}
			s.Vecs = append(s.Vecs, v)
		}
		s.Words = append(s.Words, word)
	}
	if b, err := rd.br.Peek(1); err == nil && b[0] == '\n' {
		rd.br.Discard(1)
		rd.off++
	}
	if _, err := rd.br.Peek(1); err != io.EOF {
		if err != nil {
			return fmt.Errorf("vectors: after vector %d: %w", count, err)
		}
		return rd.errAt(count+2, rd.off, true, fmt.Errorf("%w: more data after the header's %d vectors", ErrCount, count))
	}
	return nil
}

// clip shortens b for an error message.
func clip(b []byte) string {
	if len(b) > 40 {
		return string(b[:40]) + "…"
	}
	return string(b)
}

// Validate reports the first thing that makes s unwritable.
func (s *Set) Validate() error {
	if s.Dim < 1 || s.Dim > MaxDim {
		return fmt.Errorf("vectors: dimension %d out of range 1..%d", s.Dim, MaxDim)
	}
	if len(s.Vecs) != len(s.Words)*s.Dim {
		return fmt.Errorf("vectors: %d values for %d words of dimension %d", len(s.Vecs), len(s.Words), s.Dim)
	}
	seen := make(map[string]int, len(s.Words))
	for i, w := range s.Words {
		if err := checkWord([]byte(w)); err != nil {
			return fmt.Errorf("vectors: word %d: %w", i+1, err)
		}
		if j, ok := seen[w]; ok {
			return fmt.Errorf("vectors: word %d: %w %q (first as word %d)", i+1, ErrDuplicate, clip([]byte(w)), j+1)
		}
		seen[w] = i
	}
	for i, v := range s.Vecs {
		if f := float64(v); math.IsNaN(f) || math.IsInf(f, 0) {
			return fmt.Errorf("vectors: word %d: %w: value %d is %v", i/s.Dim+1, ErrValue, i%s.Dim+1, v)
		}
	}
	return nil
}

// WriteText writes s in the text format, each value in the shortest
// decimal form that reads back to the same float32.
func (s *Set) WriteText(w io.Writer) error {
	if err := s.Validate(); err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	var line []byte
	line = fmt.Appendf(line, "%d %d\n", len(s.Words), s.Dim)
	bw.Write(line)
	for i, word := range s.Words {
		line = append(line[:0], word...)
		for _, v := range s.Vec(i) {
			line = append(line, ' ')
			line = strconv.AppendFloat(line, float64(v), 'g', -1, 32)
		}
		line = append(line, '\n')
		if _, err := bw.Write(line); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// WriteBinary writes s in the binary format, with a newline after each
// vector (as the original word2vec tool does).
func (s *Set) WriteBinary(w io.Writer) error {
	if err := s.Validate(); err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	fmt.Fprintf(bw, "%d %d\n", len(s.Words), s.Dim)
	rec := make([]byte, 0, 4*s.Dim+MaxWordBytes+2)
	for i, word := range s.Words {
		rec = append(rec[:0], word...)
		rec = append(rec, ' ')
		for _, v := range s.Vec(i) {
			rec = binary.LittleEndian.AppendUint32(rec, math.Float32bits(v))
		}
		rec = append(rec, '\n')
		if _, err := bw.Write(rec); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// Write writes s in format f (Text or Binary).
func (s *Set) Write(w io.Writer, f Format) error {
	switch f {
	case Text:
		return s.WriteText(w)
	case Binary:
		return s.WriteBinary(w)
	}
	return fmt.Errorf("vectors: cannot write format %v", f)
}
