package stream

import (
	"bytes"
	"errors"
	"fmt"
	"strconv"
)

// CSV and TSV records (RFC 4180). Both are read with the same rules,
// those of encoding/csv with LazyQuotes off; only the separator differs:
// a comma, or a tab. A field holding the separator, a double quote or a
// line break is quoted ("..."), a quote inside doubled (""). A record may
// so span several lines. The first record of every input is its header,
// which names the columns; an empty line is no record.
//
// Records are cut where a line break falls outside quotes (csvCut), by the
// cutter into blocks and by the worker into records, so a quoted line
// break never splits a record. A record with an unbalanced quote runs to
// the end of its input and is then one malformed record, written through
// untouched. Every record is kept as its input bytes: tag appends its two
// fields after the last one, before the line break.

// Problems with CSV and TSV records and headers.
var (
	ErrFieldCount = errors.New("stream: wrong number of fields")
	ErrQuote      = errors.New("stream: extraneous or missing \" in quoted field")
	ErrBareQuote  = errors.New("stream: bare \" in unquoted field")
	ErrNoColumn   = errors.New("stream: no such column")
	ErrDupColumn  = errors.New("stream: column named twice")
)

// csvState is where a quote-aware scan stands between two bytes.
type csvState uint8

const (
	csvFieldStart csvState = iota // at the start of a field (or record)
	csvUnquoted                   // inside an unquoted field
	csvQuoted                     // inside a quoted field
	csvQuote                      // just after a quote inside a quoted field
)

// csvCut scans data from state s and returns the offset of the last line
// break outside quotes (a record boundary), or -1, and the state after
// data.
func csvCut(data []byte, s csvState, sep byte) (int, csvState) {
	return csvCutFirst(data, s, sep, false)
}

// csvCutFirst is csvCut, or with first set, stops at the first boundary.
func csvCutFirst(data []byte, s csvState, sep byte, first bool) (int, csvState) {
	last := -1
	for i := 0; i < len(data); i++ {
		c := data[i]
		switch s {
		case csvQuoted:
			j := bytes.IndexByte(data[i:], '"')
			if j < 0 {
				return last, csvQuoted
			}
			i += j
			s = csvQuote
			continue
		case csvQuote:
			if c == '"' { // a doubled quote: still inside
				s = csvQuoted
				continue
			}
		case csvFieldStart:
			if c == '"' {
				s = csvQuoted
				continue
			}
		}
		switch c {
		case '\n':
			last, s = i, csvFieldStart
			if first {
				return last, s
			}
		case sep:
			s = csvFieldStart
		default:
			s = csvUnquoted
		}
	}
	return last, s
}

// nextCSV returns the record that starts at b[i], as nextLine does for
// lines: its bytes without the final line break, that line break ("\n",
// "\r\n", or empty at the end of b), the offset of the next record and the
// number of line breaks inside the record. A record without a final line
// break (the end of b) that ends in CR has that CR as its terminator.
func nextCSV(b []byte, i int, sep byte) (rec, term []byte, next int, inner int) {
	s := csvFieldStart
	j := i
	for {
		k := j
		for ; k < len(b); k++ {
			c := b[k]
			if s == csvQuoted {
				q := bytes.IndexByte(b[k:], '"')
				if q < 0 {
					inner += bytes.Count(b[k:], []byte{'\n'})
					k = len(b)
					break
				}
				for _, x := range b[k : k+q] {
					if x == '\n' {
						inner++
					}
				}
				k += q
				s = csvQuote
				continue
			}
			if s == csvQuote && c == '"' {
				s = csvQuoted
				continue
			}
			if s == csvFieldStart && c == '"' {
				s = csvQuoted
				continue
			}
			if c == '\n' {
				break
			}
			if c == sep {
				s = csvFieldStart
			} else {
				s = csvUnquoted
			}
		}
		if k >= len(b) {
			// As encoding/csv does, a CR at the very end is no content.
			if len(b) > i && b[len(b)-1] == '\r' {
				return b[i : len(b)-1], b[len(b)-1:], len(b), inner
			}
			return b[i:], nil, len(b), inner
		}
		end := k
		start := end
		if end > i && b[end-1] == '\r' {
			start--
		}
		return b[i:start], b[start : end+1], end + 1, inner
	}
}

// csvParser splits one record into fields, unquoted, as encoding/csv
// does: "\r\n" inside a quoted field is read as "\n". It owns its
// buffers; a Fields result is valid until the next parse.
type csvParser struct {
	sep    byte
	buf    []byte
	ends   []int // end of each field in buf
	fields [][]byte
}

// parse splits rec (without its final line break) into p.fields, or
// returns an error with the column (from 1) of the problem.
func (p *csvParser) parse(rec []byte) error {
	p.buf, p.ends, p.fields = p.buf[:0], p.ends[:0], p.fields[:0]
	i := 0
	for {
		if i < len(rec) && rec[i] == '"' {
			i++
			for {
				j := bytes.IndexByte(rec[i:], '"')
				if j < 0 {
					return fmt.Errorf("%w (the record runs to the end of its input)", ErrQuote)
				}
				p.buf = appendCRLFasLF(p.buf, rec[i:i+j])
				i += j + 1
				if i < len(rec) && rec[i] == '"' {
					p.buf = append(p.buf, '"')
					i++
					continue
				}
				break
			}
			p.ends = append(p.ends, len(p.buf))
			if i == len(rec) {
				break
			}
			if rec[i] != p.sep {
				return fmt.Errorf("%w at column %d", ErrQuote, i+1)
			}
			i++
			continue
		}
		j := bytes.IndexByte(rec[i:], p.sep)
		f := rec[i:]
		if j >= 0 {
			f = rec[i : i+j]
		}
		if q := bytes.IndexByte(f, '"'); q >= 0 {
			return fmt.Errorf("%w at column %d", ErrBareQuote, i+q+1)
		}
		p.buf = appendCRLFasLF(p.buf, f)
		p.ends = append(p.ends, len(p.buf))
		if j < 0 {
			break
		}
		i += j + 1
	}
	start := 0
	for _, e := range p.ends {
		p.fields = append(p.fields, p.buf[start:e:e])
		start = e
	}
	return nil
}

func appendCRLFasLF(dst, s []byte) []byte {
	for {
		k := bytes.Index(s, []byte("\r\n"))
		if k < 0 {
			return append(dst, s...)
		}
		dst = append(append(dst, s[:k]...), '\n')
		s = s[k+2:]
	}
}

// appendCSVField appends s as one field: quoted when it holds the
// separator, a quote, CR or LF, or starts with a space (as encoding/csv's
// Writer does); as it is otherwise.
func appendCSVField(dst, s []byte, sep byte) []byte {
	if len(s) == 0 || (bytes.IndexByte(s, sep) < 0 && bytes.IndexAny(s, "\"\r\n") < 0 && s[0] != ' ' && s[0] != '\t') {
		return append(dst, s...)
	}
	dst = append(dst, '"')
	for _, c := range s {
		if c == '"' {
			dst = append(dst, '"')
		}
		dst = append(dst, c)
	}
	return append(dst, '"')
}

// csvHeader is one input's header: how many fields a record has and where
// the text (and label) columns are.
type csvHeader struct {
	n     int
	text  []int // field index of each text column, in the order given
	label int   // field index of the label column, or -1
	names map[string]int
	err   error // a header that cannot be used: no record is tagged
	raw   []byte
}

// parseHeader reads a header record: every name once, every text column
// (and the label column, when not "") present.
func parseHeader(rec []byte, sep byte, text []string, label string) *csvHeader {
	h := &csvHeader{label: -1, names: map[string]int{}}
	var p csvParser
	p.sep = sep
	if err := p.parse(rec); err != nil {
		h.err = err
		return h
	}
	h.n = len(p.fields)
	for i, f := range p.fields {
		name := string(f)
		if _, dup := h.names[name]; dup {
			h.err = fmt.Errorf("%w: %s", ErrDupColumn, strconv.Quote(name))
			return h
		}
		h.names[name] = i
	}
	col := func(name string) (int, bool) {
		i, ok := h.names[name]
		if !ok {
			h.err = fmt.Errorf("%w: %s (the header has %s)", ErrNoColumn, strconv.Quote(name), quoteNames(p.fields))
		}
		return i, ok
	}
	for _, t := range text {
		i, ok := col(t)
		if !ok {
			return h
		}
		h.text = append(h.text, i)
	}
	if label != "" {
		if h.label, _ = col(label); h.err != nil {
			return h
		}
	}
	return h
}

// quoteNames lists a header's names for a message: at most 8, each quoted.
func quoteNames(fields [][]byte) string {
	var b []byte
	for i, f := range fields {
		if i == 8 {
			b = fmt.Appendf(b, " and %d more", len(fields)-8)
			break
		}
		if i > 0 {
			b = append(b, ", "...)
		}
		b = strconv.AppendQuote(b, string(quoteCap(f)))
	}
	return string(b)
}

func quoteCap(f []byte) []byte {
	if len(f) > 60 {
		return f[:60]
	}
	return f
}

// csvSep is the separator of a CSV or TSV format, 0 for the others.
func csvSep(f InputFormat) byte {
	switch f {
	case InputCSV:
		return ','
	case InputTSV:
		return '\t'
	}
	return 0
}

// findRow finds the text of a CSV or TSV data record under header h: the
// text columns' fields joined with a space. A record that does not parse
// or has the wrong number of fields is foundMalformed (f.rowErr says why).
func (f *textFinder) findRow(rec []byte, h *csvHeader) found {
	if err := f.csv.parse(rec); err != nil {
		f.rowErr = err
		return found{kind: foundMalformed}
	}
	if len(f.csv.fields) != h.n {
		f.rowErr = fmt.Errorf("%w: %d, the header has %d", ErrFieldCount, len(f.csv.fields), h.n)
		return found{kind: foundMalformed}
	}
	f.text = f.text[:0]
	for k, i := range h.text {
		if k > 0 {
			f.text = append(f.text, ' ')
		}
		f.text = append(f.text, f.csv.fields[i]...)
	}
	return found{kind: foundRecord, text: f.text}
}
