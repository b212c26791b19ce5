package stream

import (
	"errors"
	"io"
)

// TextOptions say how ScanTexts finds each record's text. The zero value
// takes each line as one text. ScanTexts reads with a Reader: the rules
// are tag's (see ReaderOptions), with the format JSON Lines when there are
// TextKeys and text otherwise.
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
	Skipped  int64          // records that are malformed, too long or have no text
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
	var st TextStats
	ropt := ReaderOptions{Format: InputJSONL, TextKeys: opt.TextKeys, Stdin: opt.Stdin}
	if len(opt.TextKeys) == 0 {
		ropt.Format = InputText
	}
	r, err := OpenReader(files, ropt)
	if err != nil {
		return st, err
	}
	defer r.Close()
	for {
		rec, err := r.Read()
		st.Blank = r.Blank()
		var re *RecordError
		switch {
		case err == io.EOF:
			return st, nil
		case errors.As(err, &re):
			st.Skipped++
			if len(st.Problems) < opt.Report {
				st.Problems = append(st.Problems, re)
			}
			continue
		case err != nil:
			return st, err
		}
		st.Records++
		if err := fn(rec.Text); err != nil {
			return st, err
		}
	}
}
