package stream

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"
	"unicode"
)

// Labelled-record formats.
const (
	LabelledJSONL = "jsonl" // one JSON object a line
	LabelledCSV   = "csv"   // RFC 4180 with a header row naming the columns
	LabelledTSV   = "tsv"   // the same with tabs between the fields
	// LabelledTabText is label<TAB>text lines without a header: the rest
	// of the line after the first tab is the text, taken as it is.
	LabelledTabText = "label-tab-text"
)

// LabelledFormats lists the formats ReadLabelled reads.
var LabelledFormats = []string{LabelledJSONL, LabelledCSV, LabelledTSV, LabelledTabText}

// Problems with labelled records. A LabelledSet's Problems are
// RecordErrors that unwrap to one of these (or to ErrMalformed).
var (
	ErrNoText   = errors.New("stream: record has no text")
	ErrNoLabel  = errors.New("stream: record has no label")
	ErrBadLabel = errors.New("stream: label is not a string or an array of strings")
	ErrNoTab    = errors.New("stream: no tab between label and text")
	// ErrHeaderLine: a label-tab-text line reads "label<TAB>text", a
	// header; it is not trained on.
	ErrHeaderLine = errors.New("stream: a header line, not a record (for a file with a header use --format tsv)")
	// ErrLabelControl: a label holds a control character (Unicode general
	// category Cc: TAB, CR, LF, NUL, ESC, ...), which would break a TSV
	// output line or a terminal.
	ErrLabelControl = errors.New("stream: label has a control character")
	ErrEmptyLabel   = errors.New("stream: empty label in the array")
	ErrNoRecords    = errors.New("stream: no usable labelled records")
	ErrUnknownForm  = errors.New("stream: unknown labelled-record format")
)

// LabelledOptions say how to read labelled records. The zero value reads
// JSON Lines with the text under "text" and the label under "label".
type LabelledOptions struct {
	// Format is one of LabelledFormats; "" is LabelledJSONL.
	Format string
	// TextColumns and LabelColumn name the columns of CSV and TSV input
	// ({"text"} and "label" when empty); several text columns are joined
	// with a space.
	TextColumns []string
	LabelColumn string
	// TextKeys are dotted paths to the text (array elements by decimal
	// index, as for tag's keys); the values found are joined with a space.
	// Empty means {"text"}.
	TextKeys []string
	// LabelKey is the dotted path to the label: a string, an array of
	// strings (several tags), or a number (taken as its JSON spelling).
	// Empty means "label".
	LabelKey string
	// EmptyTags keeps a JSON record whose label is an empty array (a
	// multi-label record with no tag) as a record with no Labels; without
	// it such a record is skipped (ErrNoLabel).
	EmptyTags bool
	// Report caps the Problems kept; 0 means 5, negative none.
	Report int
	// Stdin is read for the file name "-"; nil means os.Stdin.
	Stdin io.Reader
}

// Labelled is one usable record.
type Labelled struct {
	Text   string
	Labels []string // at least one (none only under EmptyTags); single-label training uses Labels[0]
	File   string
	Line   int64
}

// LabelledSet is what ReadLabelled found, in input order.
type LabelledSet struct {
	Records  []Labelled
	Skipped  int            // records without usable text or label, or malformed
	Blank    int            // empty lines, which are not records
	Multi    int            // records with more than one label
	Arrays   int            // records whose label is a JSON array (of any length)
	NoTags   int            // records kept with an empty array under EmptyTags
	Problems []*RecordError // the first few skipped records, with why
}

// Counts returns the number of records per first label (records without
// a label are not counted).
func (s *LabelledSet) Counts() map[string]int {
	c := map[string]int{}
	for _, r := range s.Records {
		if len(r.Labels) > 0 {
			c[r.Labels[0]]++
		}
	}
	return c
}

// Rare returns, sorted, the first labels that have fewer than two records:
// too few to both train on and check.
func (s *LabelledSet) Rare() []string {
	var rare []string
	for l, n := range s.Counts() {
		if n < 2 {
			rare = append(rare, l)
		}
	}
	slices.Sort(rare)
	return rare
}

// ReadLabelled reads labelled records from files ("-" is standard input),
// one after another, each plain or gzip/zstd/bzip2 compressed (sniffed from
// its first bytes). A record without text or label, or that is not valid
// JSON, is counted in Skipped and the first few are kept in Problems with
// file and line; it is never silently dropped. An input that cannot be
// opened or read is an error (an *InputError); so is having no usable
// record at all (ErrNoRecords, naming the files).
func ReadLabelled(files []string, opt LabelledOptions) (*LabelledSet, error) {
	if opt.Format == "" {
		opt.Format = LabelledJSONL
	}
	if !slices.Contains(LabelledFormats, opt.Format) {
		return nil, fmt.Errorf("%w %q (want %s)", ErrUnknownForm, opt.Format, strings.Join(LabelledFormats, ", "))
	}
	if opt.LabelColumn == "" {
		opt.LabelColumn = "label"
	}
	if len(opt.TextKeys) == 0 {
		opt.TextKeys = []string{"text"}
	}
	if opt.LabelKey == "" {
		opt.LabelKey = "label"
	}
	if opt.Report == 0 {
		opt.Report = 5
	}
	r := &labelReader{opt: opt, set: &LabelledSet{}, label: strings.Split(opt.LabelKey, ".")}
	ropt := ReaderOptions{Format: InputJSONL, TextKeys: opt.TextKeys, Stdin: opt.Stdin}
	switch opt.Format {
	case LabelledTabText:
		ropt.Format = InputText
	case LabelledCSV, LabelledTSV:
		ropt.Format, ropt.TextKeys, ropt.LabelColumn = InputCSV, opt.TextColumns, opt.LabelColumn
		if opt.Format == LabelledTSV {
			ropt.Format = InputTSV
		}
	}
	rd, err := OpenReader(files, ropt)
	if err != nil {
		return nil, err
	}
	defer rd.Close()
	for {
		rec, err := rd.Read()
		var re *RecordError
		switch {
		case err == io.EOF:
		case errors.As(err, &re):
			r.problem(re)
			continue
		case err != nil:
			return nil, err
		default:
			r.record(rec)
			continue
		}
		break
	}
	r.set.Blank = int(rd.Blank())
	if len(r.set.Records) == 0 {
		return r.set, fmt.Errorf("%w in %s", ErrNoRecords, strings.Join(files, ", "))
	}
	return r.set, nil
}

type labelReader struct {
	opt     LabelledOptions
	set     *LabelledSet
	label   []string
	scratch []byte
}

func (r *labelReader) problem(e *RecordError) {
	r.set.Skipped++
	if len(r.set.Problems) < r.opt.Report {
		r.set.Problems = append(r.set.Problems, e)
	}
}

func (r *labelReader) record(rec *Record) {
	var text string
	var labels []string
	var err error
	switch r.opt.Format {
	case LabelledTabText:
		text, labels, err = r.tsv(rec.Raw)
		if err == nil && rec.Line == 1 && labels[0] == "label" && strings.TrimSpace(text) == "text" {
			err = ErrHeaderLine
		}
	case LabelledCSV, LabelledTSV:
		text = string(rec.Text)
		labels, err = columnLabel(rec.Label)
	default:
		text = string(rec.Text)
		var array bool
		labels, array, err = r.jsonLabels(rec.JSON)
		if array && (err == nil || errors.Is(err, ErrNoLabel) && r.opt.EmptyTags) {
			r.set.Arrays++
		}
		if array && errors.Is(err, ErrNoLabel) && r.opt.EmptyTags {
			labels, err = []string{}, nil
			r.set.NoTags++
		}
	}
	if err != nil {
		r.problem(&RecordError{File: rec.File, Line: rec.Line, Err: err})
		return
	}
	if len(labels) > 1 {
		r.set.Multi++
	}
	r.set.Records = append(r.set.Records, Labelled{Text: text, Labels: labels, File: rec.File, Line: rec.Line})
}

func (r *labelReader) tsv(b []byte) (string, []string, error) {
	label, text, ok := bytes.Cut(b, []byte{'\t'})
	switch {
	case !ok:
		return "", nil, ErrNoTab
	case len(bytes.TrimSpace(label)) == 0:
		return "", nil, ErrNoLabel
	case len(bytes.TrimSpace(text)) == 0:
		return "", nil, ErrNoText
	}
	l := string(bytes.TrimSpace(label))
	if err := checkLabel(l); err != nil {
		return "", nil, err
	}
	return string(text), []string{l}, nil
}

// columnLabel is the label of a CSV or TSV field, trimmed of spaces.
func columnLabel(f []byte) ([]string, error) {
	l := string(bytes.TrimSpace(f))
	if l == "" {
		return nil, ErrNoLabel
	}
	if err := checkLabel(l); err != nil {
		return nil, err
	}
	return []string{l}, nil
}

// checkLabel rejects a label (already trimmed of spaces) that holds a
// control character.
func checkLabel(l string) error {
	if strings.ContainsFunc(l, func(r rune) bool { return unicode.Is(unicode.Cc, r) }) {
		return fmt.Errorf("%w: %q", ErrLabelControl, l)
	}
	return nil
}

// jsonLabels finds the label of a JSON record (a valid object).
// array reports whether the value is a JSON array.
func (r *labelReader) jsonLabels(obj []byte) (labels []string, array bool, err error) {
	s, e, ok, scratch := findPath(obj, skipSpace(obj, 0), r.label, r.scratch)
	r.scratch = scratch
	if !ok {
		return nil, false, ErrNoLabel
	}
	labels, err = decodeLabels(obj[s:e])
	return labels, obj[s] == '[', err
}

// decodeLabels reads a label value: a string, a number (its spelling) or
// an array of those; spaces around a label are trimmed. An empty string
// and null are no label; an array element that is an empty string is an
// error (ErrEmptyLabel), as is a label with a control character.
func decodeLabels(raw []byte) ([]string, error) {
	var v any
	d := json.NewDecoder(bytes.NewReader(raw))
	d.UseNumber()
	if err := d.Decode(&v); err != nil {
		return nil, ErrBadLabel
	}
	one := func(x any) (string, error) {
		switch x := x.(type) {
		case string:
			return strings.TrimSpace(x), nil
		case json.Number:
			return x.String(), nil
		case nil:
			return "", nil
		}
		return "", ErrBadLabel
	}
	var out []string
	if arr, ok := v.([]any); ok {
		for i, x := range arr {
			s, err := one(x)
			if err != nil {
				return nil, err
			}
			if _, isStr := x.(string); isStr && s == "" {
				return nil, fmt.Errorf("%w (element %d)", ErrEmptyLabel, i+1)
			}
			if s != "" {
				out = append(out, s)
			}
		}
	} else {
		s, err := one(v)
		if err != nil {
			return nil, err
		}
		if s != "" {
			out = append(out, s)
		}
	}
	if len(out) == 0 {
		return nil, ErrNoLabel
	}
	for _, l := range out {
		if err := checkLabel(l); err != nil {
			return nil, err
		}
	}
	return out, nil
}
