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
