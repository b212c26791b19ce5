package stream

import (
	"errors"
	"strings"
	"testing"
)

// Messages for a person on stderr carry no package prefix, and still
// unwrap to the sentinel.
func TestErrorMessagesHaveNoPackagePrefix(t *testing.T) {
	_, _, errs := runString(t, Options{Format: InputJSONL}, "{\"text\":\"ferry\"}\n{\"text\":1}\n{\"text\":\"x\"\n")
	for _, c := range []struct {
		err  error
		want string
		is   error
	}{
		{errs[0], "stdin:2: text value is not a string: \"text\" holds a number", ErrNotString},
		{errs[1], "stdin:3: malformed JSON: unexpected end of record at column 12", ErrMalformed},
		{&InputError{File: "a.gz", Line: 4, Err: errors.Join(ErrTruncated)}, "a.gz: truncated or corrupt compressed input (after line 4; the partial line after it was not written)", ErrTruncated},
		{&InputError{File: "b.zst", Err: ErrTruncated}, "b.zst: truncated or corrupt compressed input", ErrTruncated},
	} {
		if got := c.err.Error(); got != c.want {
			t.Errorf("got %q, want %q", got, c.want)
		}
		if !errors.Is(c.err, c.is) {
			t.Errorf("%q does not unwrap to %v", c.err, c.is)
		}
		if strings.Contains(c.err.Error(), "stream:") {
			t.Errorf("%q shows the package prefix", c.err)
		}
	}
}

// A label with a control character (Unicode general category Cc, as the
// Unicode Character Database defines it) would split a TSV output line or
// reach a terminal; the record is skipped with its file and line, like any
// other unusable record. So is an empty label inside an array.
func TestReadLabelledRejectsBadLabels(t *testing.T) {
	for _, c := range []struct {
		name, format, in string
		want             error
		msg              string
	}{
		{"json newline", "", `{"text":"fare","label":"new\nline"}`, ErrLabelControl, `-:2: label has a control character: "new\nline"`},
		{"json tab", "", `{"text":"fare","label":"a\tb"}`, ErrLabelControl, `-:2: label has a control character: "a\tb"`},
		{"json NUL", "", `{"text":"fare","label":"a\u0000"}`, ErrLabelControl, `-:2: label has a control character: "a\x00"`},
		{"json C1 control", "", `{"text":"fare","label":"a\u0085b"}`, ErrLabelControl, `-:2: label has a control character: "a\u0085b"`},
		{"json DEL in array", "", `{"text":"fare","label":["ok","x\u007f"]}`, ErrLabelControl, `-:2: label has a control character: "x\x7f"`},
		{"json empty in array", "", `{"text":"fare","label":["ok",""]}`, ErrEmptyLabel, `-:2: empty label in the array (element 2)`},
		{"json blank in array", "", `{"text":"fare","label":[" ","ok"]}`, ErrEmptyLabel, `-:2: empty label in the array (element 1)`},
		{"json empty", "", `{"text":"fare","label":""}`, ErrNoLabel, `-:2: record has no label`},
		{"tsv CR inside", LabelledTSV, "a\rb\tfare", ErrLabelControl, `-:2: label has a control character: "a\rb"`},
		{"tsv ESC", LabelledTSV, "\x1b[31mred\tfare", ErrLabelControl, `-:2: label has a control character: "\x1b[31mred"`},
		{"tsv empty", LabelledTSV, "\tfare", ErrNoLabel, `-:2: record has no label`},
	} {
		t.Run(c.name, func(t *testing.T) {
			good := `{"text":"fine","label":"ok"}`
			if c.format == LabelledTSV {
				good = "ok\tfine"
			}
			set, err := ReadLabelled([]string{"-"}, LabelledOptions{Format: c.format, Stdin: strings.NewReader(good + "\n" + c.in + "\n")})
			if err != nil {
				t.Fatal(err)
			}
			if len(set.Records) != 1 || set.Skipped != 1 || len(set.Problems) != 1 {
				t.Fatalf("%d records, %d skipped, problems %v; want 1, 1, one", len(set.Records), set.Skipped, set.Problems)
			}
			p := set.Problems[0]
			if !errors.Is(p, c.want) || p.Error() != c.msg {
				t.Errorf("problem %q, want %q (%v)", p, c.msg, c.want)
			}
		})
	}
}
