package stream

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"strings"
)

// This file holds the one record primitive every reader of records uses:
// tag's workers (on their blocks), and Reader, on which ScanTexts (embed,
// inspect --ngrams) and ReadLabelled (train, eval) are built. A line's
// text is found by textFinder.find and nowhere else, so the commands agree
// on which records have which text.

// findKind is what find made of a line.
type findKind uint8

const (
	// foundRecord: a JSON record with a text at one of the paths at least,
	// or a CSV or TSV record (findRow).
	foundRecord findKind = iota
	// foundLine: a line read as text; the text is the line itself.
	foundLine
	// foundBlank: an empty line, or one of spaces and tabs only.
	foundBlank
	// foundNoText: a valid JSON record where no path holds a value other
	// than null.
	foundNoText
	// foundMalformed: not a valid JSON object where one was expected.
	foundMalformed
	// foundNotString: a path holds a number, boolean, object or an array
	// that is no byte array, and no path holds a text.
	foundNotString
)

// found is find's answer for one line.
type found struct {
	kind findKind
	// lead is the length of a leading record separator (0x1E), 0 or 1; a
	// JSON record's object is line[lead:].
	lead int
	// text is the record's text for foundRecord and foundLine: the line
	// itself, or the finder's buffer, valid until the next find.
	text []byte
	// keyed: some path held a value other than null (for the wrong-key
	// warning).
	keyed bool
}

// textFinder finds the text of one line. Its zero value is not usable:
// make one with newTextFinder. It is owned by one goroutine.
type textFinder struct {
	format InputFormat
	keys   []string   // the text keys as given (for messages)
	paths  [][]string // keys split at the dots
	scan   scanner
	key    []byte // findPath's scratch
	text   []byte
	// What err needs, kept here to keep found small (it is returned for
	// every line): for foundMalformed, the syntax error and its column
	// (from 1); for foundNotString, the index of the (last) key holding no
	// text and the first byte of its value.
	syn      syntaxError
	col      int
	badPath  int
	badValue byte
	// For CSV and TSV: the field splitter, and why findRow's record is
	// malformed.
	csv    csvParser
	rowErr error
}

// newTextFinder makes a finder for format with the text at keys (dotted
// paths; "text" when empty). An empty key is an error.
func newTextFinder(format InputFormat, keys []string) (*textFinder, error) {
	f := &textFinder{format: format, keys: textKeysOrDefault(keys)}
	f.csv.sep = csvSep(format)
	for _, k := range f.keys {
		if k == "" {
			return nil, errors.New("stream: empty text key")
		}
		f.paths = append(f.paths, strings.Split(k, "."))
	}
	return f, nil
}

// find returns what line (without its terminator) holds. The rules:
//
//   - a line of spaces and tabs (or nothing) is blank;
//   - under InputText every other line is text; under InputAuto a line is a
//     JSON record when its first byte after spaces and tabs is '{' (after
//     a leading record separator, 0x1E, as JSON text sequences have),
//     except that a '{' line that is not valid JSON and does not begin like
//     an object is text (braces in prose); under InputJSONL every line is a
//     JSON record;
//   - a JSON record's text is the strings at the paths, unescaped, joined
//     with one space; an array of integers 0..255 is the bytes of a text
//     (journalctl -o json writes non-UTF-8 values so); null or an absent
//     path adds nothing; any other value adds nothing, and when no path
//     holds a text the record is foundNotString;
//   - a JSON record with no value at any path is foundNoText.
//
// A JSON record with a text that is empty or only spaces is foundRecord: what
// such a text means is the caller's to decide.
func (f *textFinder) find(line []byte) found {
	if isBlank(line) {
		return found{kind: foundBlank}
	}
	switch f.format {
	case InputText:
		return found{kind: foundLine, text: line}
	case InputAuto:
		if !looksJSON(line) {
			return found{kind: foundLine, text: line}
		}
	}
	lead := seqPrefix(line)
	obj := line[lead:]
	if ok, e := f.scan.validObject(obj); !ok {
		if f.format == InputAuto && lead == 0 && !objectStart(obj) {
			// Braces in prose ("{sigh} my card was declined"), not a
			// broken record: a text line.
			return found{kind: foundLine, text: line}
		}
		f.syn, f.col = e, lead+e.off+1
		return found{kind: foundMalformed, lead: lead}
	}
	f.text = f.text[:0]
	text := f.text[:0]
	has, badPath := false, -1
	for p, path := range f.paths {
		s, e, ok, key := findMember(obj, f.scan.members, path, f.key)
		f.key = key
		if !ok {
			continue
		}
		sep := len(text)
		if has {
			text = append(text, ' ')
		}
		switch obj[s] {
		case '"':
			text = appendUnescaped(text, obj[s+1:e-1])
			has = true
			continue
		case '[': // the journal's bytes of a text that is not UTF-8
			var isBytes bool
			if text, isBytes = appendByteArray(text, obj, s); isBytes {
				has = true
				continue
			}
		}
		text = text[:sep]
		if obj[s] != 'n' { // null adds nothing
			badPath, f.badValue = p, obj[s]
		}
	}
	f.text = text
	switch {
	case has:
		return found{kind: foundRecord, lead: lead, text: text, keyed: true}
	case badPath >= 0:
		f.badPath = badPath
		return found{kind: foundNotString, lead: lead, keyed: true}
	}
	return found{kind: foundNoText, lead: lead}
}

// err is the problem with the line of the last find, r, when it found no
// text: nil for foundRecord, foundLine and foundBlank.
func (f *textFinder) err(r found) error {
	switch r.kind {
	case foundMalformed:
		if f.csv.sep != 0 {
			return f.rowErr
		}
		return fmt.Errorf("%w: %s at column %d", ErrMalformed, f.syn.msg, f.col)
	case foundNotString:
		return fmt.Errorf("%w: %q holds %s", ErrNotString, f.keys[f.badPath], kindName(f.badValue))
	case foundNoText:
		return ErrNoText
	}
	return nil
}

// ReaderOptions say how a Reader finds each record's text. The zero value
// decides per line between JSON and text (InputAuto) and takes the text of
// a JSON record from its "text" key.
type ReaderOptions struct {
	// Format and TextKeys are as in Options: the same rules as tag's. For
	// InputCSV and InputTSV the TextKeys are column names.
	Format   InputFormat
	TextKeys []string
	// LabelColumn, for CSV and TSV, is a column every header must have;
	// its field is each Record's Label.
	LabelColumn string
	// MaxLine is the longest line read (DefaultMaxLine when 0); a longer
	// one is an ErrTooLong record error.
	MaxLine int
	// Stdin is read for the file name "-" by OpenReader; nil means
	// os.Stdin.
	Stdin io.Reader
}

// Record is one record a Reader read. Its slices belong to the Reader and
// are valid until the next call of Read.
type Record struct {
	File string // as given ("-" for standard input)
	Line int64  // from 1 within File
	// Raw is the line without its terminator ("\n" or "\r\n"), with a
	// leading record separator if it had one.
	Raw []byte
	// JSON is the record's object (after a record separator) for a JSON
	// record, nil for a text line.
	JSON []byte
	// Text is the record's text: never empty nor only white space.
	Text []byte
	// Fields are a CSV or TSV record's fields, unquoted; Label is the
	// field of ReaderOptions.LabelColumn (nil without one).
	Fields [][]byte
	Label  []byte
}

// Reader reads records one at a time from one input or several in a row,
// in the manner of encoding/csv's Reader: Read returns the next record
// with text, a *RecordError for a record without (the next Read goes on
// after it), or io.EOF after the last. Blank lines are no records; they
// are counted (Blank). A Reader is not safe for concurrent use.
type Reader struct {
	opt     ReaderOptions
	find    *textFinder
	maxLine int
	rec     Record
	blank   int64
	err     error // sticky: an input error or io.EOF

	files []string // OpenReader's inputs still to open
	multi bool     // made by OpenReader
	cur   *input   // the input open now, when the Reader opened it
	br    *bufio.Reader
	line  []byte // a line longer than br's buffer
	lines int64  // lines of the current input read so far

	sep  byte       // CSV or TSV separator; 0 for lines
	hdr  *csvHeader // the current input's header, once read
	rows []byte     // a CSV record of several lines
}

// NewReader returns a Reader of r, whose records' File is name. r is read
// as it is: no decompression, no byte-order mark skipped.
func NewReader(r io.Reader, name string, opt ReaderOptions) (*Reader, error) {
	rd, err := newReader(opt)
	if err != nil {
		return nil, err
	}
	rd.rec.File = name
	rd.br = bufio.NewReaderSize(r, 64<<10)
	return rd, nil
}

// OpenReader returns a Reader of files ("-" is opt.Stdin), one after
// another, each plain or gzip/zstd/bzip2 compressed (sniffed from its
// first bytes) and with a leading byte-order mark skipped, as tag reads
// them. A file that cannot be opened or read is an *InputError from Read,
// which then stops. Close closes the file open at the time.
func OpenReader(files []string, opt ReaderOptions) (*Reader, error) {
	rd, err := newReader(opt)
	if err != nil {
		return nil, err
	}
	rd.files, rd.multi = files, true
	return rd, nil
}

func newReader(opt ReaderOptions) (*Reader, error) {
	f, err := newTextFinder(opt.Format, opt.TextKeys)
	if err != nil {
		return nil, err
	}
	return &Reader{opt: opt, find: f, maxLine: max(cmp0(opt.MaxLine, DefaultMaxLine), 1), sep: csvSep(opt.Format)}, nil
}

// Blank returns the number of blank lines read so far.
func (r *Reader) Blank() int64 { return r.blank }

// Close closes the input OpenReader opened and that is open now.
func (r *Reader) Close() error {
	if r.cur != nil {
		r.cur.closer()
		r.cur = nil
	}
	r.files, r.br = nil, nil
	return nil
}

// Read returns the next record with text. See Reader.
func (r *Reader) Read() (*Record, error) {
	for r.err == nil {
		if r.br == nil && !r.open() {
			break
		}
		b, err := r.readRecord()
		if len(b) > 0 {
			r.rec.Line = r.lines + 1
			r.lines += int64(bytes.Count(b, []byte{'\n'}))
			if b[len(b)-1] != '\n' {
				r.lines++
			}
			if rec, rerr := r.record(b); rec != nil || rerr != nil {
				switch {
				case r.err != nil: // a header error stopped the Reader
				case err == io.EOF:
					r.next()
				case err != nil:
					r.fail(err)
				}
				return rec, rerr
			}
		}
		switch {
		case err == io.EOF:
			r.next()
		case err != nil:
			r.fail(err)
		}
	}
	return nil, r.err
}

// open opens the next of OpenReader's files, or ends the Reader.
func (r *Reader) open() bool {
	if len(r.files) == 0 {
		r.err = io.EOF
		return false
	}
	name := r.files[0]
	r.files = r.files[1:]
	r.rec.File, r.rec.Line, r.lines, r.hdr = name, 0, 0, nil
	in, err := openInput(name, r.opt.Stdin, nil)
	if err != nil {
		r.err = &InputError{File: name, Err: err}
		return false
	}
	r.cur = in
	r.br = bufio.NewReaderSize(in.r, 64<<10)
	return true
}

// next ends the current input: OpenReader goes on with the next file.
func (r *Reader) next() {
	r.br = nil
	if r.cur != nil {
		r.cur.closer()
		r.cur = nil
	}
	if !r.multi {
		r.err = io.EOF
	}
}

func (r *Reader) fail(err error) {
	r.err = &InputError{File: r.rec.File, Line: r.lines, Err: err}
	r.Close()
}

// readLine returns the next line with its terminator, or what is left
// before the end of the input (or an error).
func (r *Reader) readLine() ([]byte, error) {
	b, err := r.br.ReadSlice('\n')
	if err != bufio.ErrBufferFull {
		return b, err
	}
	r.line = append(r.line[:0], b...)
	for err == bufio.ErrBufferFull {
		b, err = r.br.ReadSlice('\n')
		r.line = append(r.line, b...)
	}
	return r.line, err
}

// readRecord returns the next record's lines: one line, or for CSV and
// TSV as many as a quoted line break makes it span.
func (r *Reader) readRecord() ([]byte, error) {
	b, err := r.readLine()
	if r.sep == 0 || err != nil {
		return b, err
	}
	if _, s := csvCut(b, csvFieldStart, r.sep); s != csvFieldStart {
		r.rows = append(r.rows[:0], b...)
		for s != csvFieldStart && err == nil {
			b, err = r.readLine()
			r.rows = append(r.rows, b...)
			_, s = csvCut(b, s, r.sep)
		}
		return r.rows, err
	}
	return b, nil
}

// record makes a Record of one line, or a RecordError; both are nil for a
// blank line.
func (r *Reader) record(b []byte) (*Record, error) {
	if r.sep != 0 {
		return r.row(b)
	}
	line, _, _ := nextLine(b, 0)
	if len(line) > r.maxLine {
		return nil, r.problem(fmt.Errorf("%w (over %d bytes)", ErrTooLong, r.maxLine))
	}
	f := r.find.find(line)
	switch f.kind {
	case foundBlank:
		r.blank++
		return nil, nil
	case foundRecord, foundLine:
	default:
		return nil, r.problem(r.find.err(f))
	}
	if len(bytes.TrimSpace(f.text)) == 0 {
		return nil, r.problem(ErrNoText)
	}
	r.rec.Raw, r.rec.Text, r.rec.JSON = line, f.text, nil
	if f.kind == foundRecord {
		r.rec.JSON = line[f.lead:]
	}
	return &r.rec, nil
}

// row is record for CSV and TSV: the first record of an input is its
// header (a HeaderError stops the Reader), the others rows under it.
func (r *Reader) row(b []byte) (*Record, error) {
	rec, _, _, _ := nextCSV(b, 0, r.sep)
	switch {
	case len(rec) == 0:
		r.blank++
		return nil, nil
	case r.hdr == nil:
		if len(rec) > r.maxLine {
			r.hdr = &csvHeader{err: fmt.Errorf("%w (over %d bytes)", ErrTooLong, r.maxLine)}
		} else {
			r.hdr = parseHeader(rec, r.sep, r.find.keys, r.opt.LabelColumn)
		}
		if r.hdr.err != nil {
			err := &HeaderError{File: r.rec.File, Line: r.rec.Line, Err: r.hdr.err}
			r.Close()
			r.err = err
			return nil, err
		}
		return nil, nil
	case len(rec) > r.maxLine:
		return nil, r.problem(fmt.Errorf("%w (over %d bytes)", ErrTooLong, r.maxLine))
	}
	f := r.find.findRow(rec, r.hdr)
	if f.kind == foundMalformed {
		return nil, r.problem(r.find.err(f))
	}
	if len(bytes.TrimSpace(f.text)) == 0 {
		return nil, r.problem(ErrNoText)
	}
	r.rec.Raw, r.rec.Text, r.rec.JSON, r.rec.Fields, r.rec.Label = rec, f.text, nil, r.find.csv.fields, nil
	if r.hdr.label >= 0 {
		r.rec.Label = r.find.csv.fields[r.hdr.label]
	}
	return &r.rec, nil
}

func (r *Reader) problem(err error) error {
	return &RecordError{File: r.rec.File, Line: r.rec.Line, Err: err}
}
