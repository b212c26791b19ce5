package stream

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// The exchanges follow the sequences in rsyslog's
// plugins/external/INTERFACE.md ("Example of exchanged messages" and "How
// to provide feedback when using transactions"): each step sends one line
// and reads one reply, and the file must already hold the records at the
// moment the reply is read (also a DEFER_COMMIT's: see Confirm on
// rsyslog's issue 2420).
func TestConfirmExchange(t *testing.T) {
	type step struct {
		send  string // a line, without its '\n'
		reply string
		lines int // records in the file when the reply is read
	}
	tests := []struct {
		name  string
		steps []step
		final int // records in the file after the end of input
	}{
		{"single messages", []step{
			{`{"text":"ferry late"}`, "OK", 1},
			{`{"text":"fog on the quay"}`, "OK", 2},
			{"plain text line about the harbour", "OK", 3},
		}, 3},
		{"transactions", []step{
			{"BEGIN TRANSACTION", "OK", 0},
			{`{"text":"ferry late"}`, "DEFER_COMMIT", 1},
			{`{"text":"fog on the quay"}`, "DEFER_COMMIT", 2},
			{"COMMIT TRANSACTION", "OK", 2},
			{"BEGIN TRANSACTION", "OK", 2},
			{`{"text":"wind at Holm"}`, "DEFER_COMMIT", 3},
			{"COMMIT TRANSACTION", "OK", 3},
		}, 3},
		{"empty transaction", []step{
			{"BEGIN TRANSACTION", "OK", 0},
			{"COMMIT TRANSACTION", "OK", 0},
		}, 0},
		{"a transaction sent again is written again", []step{
			{"BEGIN TRANSACTION", "OK", 0},
			{`{"text":"ferry late"}`, "DEFER_COMMIT", 1},
			{"BEGIN TRANSACTION", "OK", 1},
			{`{"text":"ferry late"}`, "DEFER_COMMIT", 2},
			{"COMMIT TRANSACTION", "OK", 2},
		}, 2},
		{"problem records are written and confirmed", []step{
			{`{"text":42}`, "OK", 1},
			{`{"text":"cut`, "OK", 2},
			{"", "OK", 3},
		}, 3},
		{"a transaction cut short keeps its records", []step{
			{"BEGIN TRANSACTION", "OK", 0},
			{`{"text":"ferry late"}`, "DEFER_COMMIT", 1},
		}, 1},
		{"a mark needs the whole line", []step{
			{"BEGIN TRANSACTION ", "OK", 1},
			{" COMMIT TRANSACTION", "OK", 2},
		}, 2},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "tagged.jsonl")
			inR, inW := io.Pipe()
			repR, repW := io.Pipe()
			done := make(chan error, 1)
			var errs []string
			go func() {
				opts := Options{Tagger: newKeywordTagger(), Jobs: 1, Output: out, Append: true,
					OnError: func(err error) { errs = append(errs, err.Error()) }}
				_, err := Confirm(context.Background(), opts, ConfirmOptions{}, inR, repW)
				repW.Close()
				done <- err
			}()
			replies := bufio.NewReader(repR)
			read := func() string {
				t.Helper()
				l, err := replies.ReadString('\n')
				if err != nil {
					t.Fatalf("reading a reply: %v", err)
				}
				return strings.TrimSuffix(l, "\n")
			}
			if r := read(); r != "OK" {
				t.Fatalf("start-up reply %q, want OK", r)
			}
			for i, s := range tt.steps {
				if _, err := io.WriteString(inW, s.send+"\n"); err != nil {
					t.Fatal(err)
				}
				if r := read(); r != s.reply {
					t.Fatalf("step %d (%q): reply %q, want %q", i, s.send, r, s.reply)
				}
				if n := countLines(t, out); n != s.lines {
					t.Fatalf("step %d (%q): %d records in the file at the reply, want %d", i, s.send, n, s.lines)
				}
			}
			inW.Close()
			if err := <-done; err != nil {
				t.Fatal(err)
			}
			if rest, _ := io.ReadAll(replies); len(rest) > 0 {
				t.Fatalf("replies after the end: %q", rest)
			}
			if n := countLines(t, out); n != tt.final {
				t.Fatalf("%d records in the end, want %d", n, tt.final)
			}
			b, _ := os.ReadFile(out)
			for l := range bytes.Lines(b) {
				if !bytes.Contains(l, []byte(`"tag"`)) && !bytes.HasPrefix(l, []byte(`{"text":42}`)) && !bytes.HasPrefix(l, []byte(`{"text":"cut`)) && len(bytes.TrimSpace(l)) > 0 && !bytes.Contains(l, []byte("\t")) {
					t.Errorf("record not tagged: %q", l)
				}
			}
			if tt.name == "problem records are written and confirmed" && len(errs) != 2 {
				t.Errorf("problems reported: %q, want 2", errs)
			}
		})
	}
}

func countLines(t *testing.T, path string) int {
	t.Helper()
	b, err := os.ReadFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return 0
	}
	if err != nil {
		t.Fatal(err)
	}
	if len(b) > 0 && b[len(b)-1] != '\n' {
		t.Fatalf("%s ends inside a line: %q", path, b)
	}
	return bytes.Count(b, []byte("\n"))
}

// The tagged records are those Run writes for the same messages: the
// protocol changes when records are written, never what.
func TestConfirmSameRecordsAsRun(t *testing.T) {
	var in, proto strings.Builder
	for i := range 500 {
		if i%100 == 0 {
			proto.WriteString("BEGIN TRANSACTION\n")
		}
		l := `{"n":` + strings.Repeat("7", i%5+1) + `,"text":"storm and fog at the harbour ferry deck"}` + "\n"
		if i%3 == 0 {
			l = "wind on the ticket deck, crossing held\n"
		}
		in.WriteString(l)
		proto.WriteString(l)
		if i%100 == 99 {
			proto.WriteString("COMMIT TRANSACTION\n")
		}
	}
	var want bytes.Buffer
	if _, err := Run(context.Background(), Options{Tagger: newKeywordTagger(), Jobs: 1}, nil, strings.NewReader(in.String()), &want); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "tagged.jsonl")
	var replies bytes.Buffer
	st, err := Confirm(context.Background(), Options{Tagger: newKeywordTagger(), Jobs: 1, Output: out, Append: true}, ConfirmOptions{Fsync: true}, strings.NewReader(proto.String()), &replies)
	if err != nil {
		t.Fatal(err)
	}
	got, _ := os.ReadFile(out)
	if !bytes.Equal(got, want.Bytes()) {
		t.Fatalf("records differ from Run's:\n%.300s\nwant\n%.300s", got, want.Bytes())
	}
	if st.Records != 500 || st.Written != 500 {
		t.Fatalf("stats: %d records, %d written", st.Records, st.Written)
	}
	if c := strings.Count(replies.String(), "DEFER_COMMIT\n"); c != 500 {
		t.Fatalf("%d DEFER_COMMIT replies, want 500", c)
	}
	if c := strings.Count(replies.String(), "OK\n"); c != 1+2*5 {
		t.Fatalf("%d OK replies, want 11 (start, and a begin and a commit per transaction)", c)
	}
}

// A write that fails is answered with one error line (not OK, so rsyslog
// keeps the message and sends it again), and Confirm returns the error at
// the end. /dev/full fails every write with ENOSPC.
func TestConfirmWriteError(t *testing.T) {
	if _, err := os.Stat("/dev/full"); err != nil {
		t.Skip("no /dev/full")
	}
	for _, proto := range []string{
		"{\"text\":\"ferry late\"}\n",
		"BEGIN TRANSACTION\n{\"text\":\"ferry late\"}\nCOMMIT TRANSACTION\n",
	} {
		var replies bytes.Buffer
		_, err := Confirm(context.Background(), Options{Tagger: newKeywordTagger(), Jobs: 1, Output: "/dev/full", Append: true}, ConfirmOptions{}, strings.NewReader(proto), &replies)
		if !errors.Is(err, syscall.ENOSPC) {
			t.Fatalf("error %v, want ENOSPC", err)
		}
		lines := strings.Split(strings.TrimSuffix(replies.String(), "\n"), "\n")
		last := lines[len(lines)-1]
		if lines[0] != "OK" || !strings.HasPrefix(last, "error: ") || !strings.Contains(last, "no space left") {
			t.Fatalf("replies %q: want OK first and an error line for the failed write", lines)
		}
	}
}

// An output that cannot be opened is answered with an error line instead
// of the start-up OK.
func TestConfirmOpenError(t *testing.T) {
	out := filepath.Join(t.TempDir(), "missing", "tagged.jsonl")
	var replies bytes.Buffer
	_, err := Confirm(context.Background(), Options{Tagger: newKeywordTagger(), Jobs: 1, Output: out, Append: true}, ConfirmOptions{}, strings.NewReader("x\n"), &replies)
	if err == nil || !strings.HasPrefix(replies.String(), "error: open output") || strings.Count(replies.String(), "\n") != 1 {
		t.Fatalf("error %v, replies %q", err, replies.String())
	}
}

// A cut last line (a run killed inside a write) was never confirmed: it is
// removed at start, and said so; whole lines stay.
func TestConfirmRepairsCutLine(t *testing.T) {
	for _, tt := range []struct{ before, after string }{
		{"", ""},
		{"{\"a\":1}\n", "{\"a\":1}\n"},
		{"{\"a\":1}\n{\"a\":", "{\"a\":1}\n"},
		{"{\"a\":", ""},
		{"{\"a\":1}\n" + strings.Repeat("x", 200000), "{\"a\":1}\n"},
	} {
		out := filepath.Join(t.TempDir(), "tagged.jsonl")
		if err := os.WriteFile(out, []byte(tt.before), 0o644); err != nil {
			t.Fatal(err)
		}
		var notes []string
		var replies bytes.Buffer
		_, err := Confirm(context.Background(), Options{Tagger: newKeywordTagger(), Jobs: 1, Output: out, Append: true},
			ConfirmOptions{Note: func(s string) { notes = append(notes, s) }}, strings.NewReader(""), &replies)
		if err != nil {
			t.Fatal(err)
		}
		got, _ := os.ReadFile(out)
		if string(got) != tt.after {
			t.Fatalf("after repair %q, want %q", got, tt.after)
		}
		if (tt.before != tt.after) != (len(notes) == 1) {
			t.Fatalf("notes %q for %q", notes, tt.before)
		}
	}
}

// FuzzProtoReader: omprog's input split into messages and marks gives
// back the input (each mark as its line), and a mark is only ever a whole
// line equal to it.
func FuzzProtoReader(f *testing.F) {
	f.Add([]byte("BEGIN TRANSACTION\n{\"msg\":\"a\"}\nCOMMIT TRANSACTION\n"))
	f.Add([]byte("x\nBEGIN TRANSACTION"))
	f.Add([]byte("BEGIN TRANSACTION\r\nCOMMIT TRANSACTION \n\n\n"))
	f.Add([]byte(strings.Repeat("y", 70000) + "\nCOMMIT TRANSACTION\n"))
	f.Fuzz(func(t *testing.T, in []byte) {
		p := newProtoReader(bytes.NewReader(in), "", "")
		var back []byte
		var lines int64
		for {
			k, l, err := p.next()
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			lines++
			switch k {
			case protoBegin:
				back = append(back, DefaultBeginMark+"\n"...)
			case protoCommit:
				back = append(back, DefaultCommitMark+"\n"...)
			default:
				if len(l) == 0 {
					t.Fatal("empty message")
				}
				if i := bytes.IndexByte(l, '\n'); i >= 0 && i != len(l)-1 {
					t.Fatalf("message %q holds a line break", l)
				}
				if s := string(l); s == DefaultBeginMark+"\n" || s == DefaultCommitMark+"\n" {
					t.Fatalf("mark %q taken for a message", l)
				}
				back = append(back, l...)
			}
		}
		if !bytes.Equal(back, in) {
			t.Fatalf("rejoined %q, input %q", back, in)
		}
		if lines != p.line {
			t.Fatalf("%d lines returned, %d counted", lines, p.line)
		}
	})
}
