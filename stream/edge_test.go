package stream

import (
	"bytes"
	"errors"
	"strings"
	"testing"
)

// checkLossless checks that every input line gave exactly one output line,
// in order: unchanged, or tagged with its bytes kept (JSON spliced, text
// after tag TAB confidence TAB).
func checkLossless(t *testing.T, in, out string) {
	t.Helper()
	if in != "" && !strings.HasSuffix(in, "\n") {
		in += "\n" // a last line without newline gets one
	}
	ins := strings.SplitAfter(in, "\n")
	outs := strings.SplitAfter(out, "\n")
	if len(ins) != len(outs) {
		t.Fatalf("%d lines in, %d out", len(ins)-1, len(outs)-1)
	}
	for i := range ins {
		a, b := ins[i], outs[i]
		if a == b {
			continue
		}
		term := "\n"
		if strings.HasSuffix(a, "\r\n") {
			term = "\r\n"
		}
		if !strings.HasSuffix(b, term) {
			t.Errorf("line %d: terminator not kept: %q -> %.80q", i+1, a, b)
			continue
		}
		a, b = strings.TrimSuffix(a, term), strings.TrimSuffix(b, term)
		if looksJSON([]byte(a)) {
			checkSpliced(t, []byte(a), []byte(b), "tag", "confidence")
		} else if parts := strings.SplitN(b, "\t", 3); len(parts) != 3 || parts[2] != a {
			t.Errorf("line %d: text line not kept: %.80q -> %.80q", i+1, a, b)
		}
	}
}

func TestBadInputLossless(t *testing.T) {
	deep := `{"text":"ferry","d":` + strings.Repeat(`[`, 9_998) + strings.Repeat(`]`, 9_998) + `}`
	deeper := `{"text":"ferry","d":` + strings.Repeat(`{"a":`, 100_000) + "1" + strings.Repeat(`}`, 100_000) + `}`
	big := `{"id":1,"text":"` + strings.Repeat("fog on the ferry deck ", 10<<20/22) + `"}`
	for _, c := range []struct {
		name  string
		in    string
		opts  Options
		check func(Stats) bool
		errIs error
	}{
		{"malformed JSON", "{\"a\":\n{\"bad}\n{\"text\":\"x\"} y\n{\"text\":\"ok ferry\"}\n", Options{},
			func(s Stats) bool { return s.Malformed == 3 && s.Tags["crossing"] == 1 && s.Passed == 3 }, ErrMalformed},
		{"invalid UTF-8", "caf\xe9 ferry\n{\"text\":\"caf\xe9 fog\"}\n\xff\xfe\n", Options{},
			func(s Stats) bool { return s.InvalidUTF8 == 3 && s.Written == 3 && s.Rejected == 0 }, nil},
		{"empty and blank lines", "\n\n  \t\nferry\n\n", Options{},
			func(s Stats) bool { return s.Blank == 4 && s.Passed == 4 && s.Tags["crossing"] == 1 }, nil},
		{"CRLF", "ferry deck\r\n{\"text\":\"fog\"}\r\n\r\n{\"text\":\"x\"} \r\nlone\rcr\n", Options{},
			func(s Stats) bool { return s.CRLF == 4 && s.Written == 5 && s.Blank == 1 }, nil},
		{"10 MB line", big + "\nwind\n", Options{},
			func(s Stats) bool { return s.Tags["crossing"] == 1 && s.Tags["weather"] == 1 }, nil},
		{"text not a string", `{"text":5}` + "\n" + `{"text":true}` + "\n" + `{"text":{"a":"b"}}` + "\n" + `{"text":["x"]}` + "\n" + `{"text":null}` + "\n",
			Options{}, func(s Stats) bool { return s.NotString == 4 && s.NoText == 1 && s.Passed == 5 }, ErrNotString},
		{"deep nesting", deep + "\n" + deeper + "\n", Options{},
			func(s Stats) bool { return s.Tags["crossing"] == 2 }, nil},
		{"no final newline", "ferry\n{\"text\":\"fog\"}", Options{},
			func(s Stats) bool { return s.Written == 2 }, nil},
		{"line over the limit", "ferry\n" + strings.Repeat("x", 5000) + "\nfog\n" + strings.Repeat("y", 3000), Options{MaxLine: 1000, BlockSize: 256},
			func(s Stats) bool { return s.TooLong == 2 && s.Written == 4 && s.Tags["weather"] == 1 }, ErrTooLong},
	} {
		t.Run(c.name, func(t *testing.T) {
			for _, jobs := range []int{1, 3} {
				o := c.opts
				o.Jobs = jobs
				out, st, errs := runString(t, o, c.in)
				checkLossless(t, c.in, out)
				if !c.check(st) {
					t.Errorf("-j %d: stats %+v", jobs, st)
				}
				for _, e := range errs {
					var re *RecordError
					if !errors.As(e, &re) || re.File != "stdin" || re.Line < 1 || c.errIs == nil || !errors.Is(e, c.errIs) {
						t.Errorf("unexpected error %v", e)
					}
				}
				if c.errIs != nil && len(errs) == 0 {
					t.Errorf("no error reported")
				}
			}
		})
	}
}

// With a rejects file, problem records go there, in order, and nowhere
// else.
func TestRejects(t *testing.T) {
	in := "{\"text\":\"ferry\"}\n{\"bad\n{\"text\":1}\nfog\n" + strings.Repeat("z", 300) + "\n"
	var rej bytes.Buffer
	out, st, _ := runString(t, Options{Rejects: &rej, MaxLine: 200, BlockSize: 64}, in)
	if want := "{\"bad\n{\"text\":1}\n" + strings.Repeat("z", 300) + "\n"; rej.String() != want {
		t.Errorf("rejects %q, want %q", rej.String(), want)
	}
	if st.Rejected != 3 || st.Written != 2 || strings.Count(out, "\n") != 2 {
		t.Errorf("stats %+v, out %q", st, out)
	}
}

// Error lines count from 1 in each input, across blocks.
func TestErrorLineNumbers(t *testing.T) {
	var b strings.Builder
	for i := range 5000 {
		if i%1000 == 999 {
			b.WriteString("{\"oops\n")
		} else {
			b.WriteString("{\"text\":\"ferry\"}\n")
		}
	}
	_, _, errs := runString(t, Options{BlockSize: 1000, Jobs: 4}, b.String())
	if len(errs) != 5 {
		t.Fatalf("%d errors: %v", len(errs), errs)
	}
	for i, e := range errs {
		var re *RecordError
		if !errors.As(e, &re) || re.Line != int64(1000*(i+1)) {
			t.Errorf("error %d: %v, want line %d", i, e, 1000*(i+1))
		}
	}
}
