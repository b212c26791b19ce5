package main

import (
	"errors"
	"slices"
	"strings"

	"github.com/spf13/pflag"

	"convtag/stream"
)

// labelledFlags are the input flags train and eval share: the format and
// where the text and the label are (keys in JSON, columns in CSV and TSV).
type labelledFlags struct {
	format, labelKey, labelColumn string
	textKeys, textColumns         []string
	keysSet, columnsSet           bool // --text-key/--label-key, --text-column/--label-column given
}

// noteChanged records which of the key and column flags were given.
func (f *labelledFlags) noteChanged(fl *pflag.FlagSet) {
	f.keysSet = fl.Changed("text-key") || fl.Changed("label-key")
	f.columnsSet = fl.Changed("text-column") || fl.Changed("label-column")
}

func (f *labelledFlags) add(fl *pflag.FlagSet) {
	fl.StringArrayVar(&f.textKeys, "text-key", []string{"text"}, "dotted path of the text in a JSON record; repeat to join several")
	fl.StringVar(&f.labelKey, "label-key", "label", "dotted path of the label (a string or an array of strings)")
	fl.StringVar(&f.format, "format", stream.LabelledJSONL, "input format: jsonl, csv or tsv (with a header row), or label-tab-text (label<TAB>text lines, no header)")
	fl.StringArrayVar(&f.textColumns, "text-column", []string{"text"}, "csv/tsv: header name of the text column; repeat to join several with a space")
	fl.StringVar(&f.labelColumn, "label-column", "label", "csv/tsv: header name of the label column")
}

// check returns the usage error for a format we do not read, or for key
// or column flags the format has no use for (they would be ignored).
func (f *labelledFlags) check(cmd string) error {
	if !slices.Contains(stream.LabelledFormats, f.format) {
		return usageErr("--format "+strings.Join(stream.LabelledFormats, "|"), "%s: unknown --format %q", cmd, f.format)
	}
	columns := f.format == stream.LabelledCSV || f.format == stream.LabelledTSV
	switch {
	case columns && f.keysSet:
		return usageErr("--format "+f.format+" --text-column NAME --label-column NAME", "%s: --text-key and --label-key are for JSON Lines; --format %s takes --text-column and --label-column", cmd, f.format)
	case !columns && f.columnsSet:
		return usageErr("--format csv --text-column NAME", "%s: --text-column and --label-column are for --format csv or tsv", cmd)
	}
	return nil
}

func (f *labelledFlags) options(a *app) stream.LabelledOptions {
	return stream.LabelledOptions{Format: f.format, TextKeys: f.textKeys, LabelKey: f.labelKey,
		TextColumns: f.textColumns, LabelColumn: f.labelColumn, Stdin: a.stdin}
}

// headerErr makes a CSV or TSV header that does not fit the flags a usage
// error (exit 2) with a hint; other errors come back as they are.
// labelled adds the headerless format to the hint, for train and eval.
func headerErr(err error, labelled bool) error {
	var he *stream.HeaderError
	if !errors.As(err, &he) {
		return err
	}
	hint := "--text-column NAME with a name from the header"
	if labelled {
		hint = "--text-column NAME and --label-column NAME with names from the header, or --format label-tab-text for label<TAB>text lines without one"
	}
	if errors.Is(err, stream.ErrDupColumn) {
		hint = "unique column names in the header, or --tag-key/--confidence-key names it does not have"
	}
	return usageErr(hint, "%v", err)
}

// tagColumns checks tag's CSV and TSV flags and sets o.TextKeys: -k is
// for JSON, --text-column for CSV and TSV.
func tagColumns(o *stream.Options, textKeys, textColumns []string, why int) error {
	if o.Format != stream.InputCSV && o.Format != stream.InputTSV {
		if len(textColumns) > 0 {
			return usageErr("convtag tag --format csv --text-column NAME", "--text-column is for --format csv or tsv; JSON records take -k")
		}
		o.TextKeys = textKeys
		return nil
	}
	if len(textKeys) > 0 {
		return usageErr("convtag tag --format csv --text-column NAME", "-k is for JSON records; CSV and TSV take --text-column")
	}
	for _, c := range []struct {
		flag string
		on   bool
	}{{"--scores", o.Scores}, {"--top", o.Top > 0}, {"--why", why > 0}, {"--known-key", o.KnownKey != ""}} {
		if c.on {
			return usageErr("convtag tag --format jsonl "+c.flag+" ...", "%s: CSV and TSV output has no place for it", c.flag)
		}
	}
	for _, c := range textColumns {
		if c == "" {
			return usageErr("convtag tag --text-column NAME", "--text-column: empty name")
		}
	}
	o.TextKeys = textColumns
	return nil
}
