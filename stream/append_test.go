package stream

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// writeLog records each Write call it gets.
type writeLog struct{ calls [][]byte }

func (w *writeLog) Write(p []byte) (int, error) {
	w.calls = append(w.calls, bytes.Clone(p))
	return len(p), nil
}

// Every write that reaches the destination ends on a record boundary, for
// blocks smaller and larger than the buffer, so a process killed between
// two writes leaves whole lines.
func TestWriterWholeRecords(t *testing.T) {
	dst := &writeLog{}
	w, err := newWriter("", CompressNone, false, dst)
	if err != nil {
		t.Fatal(err)
	}
	var want bytes.Buffer
	for i, size := range []int{10, 200 << 10, 100 << 10, 1 << 20, 3, writeBuffer, writeBuffer - 1, 70 << 10, 500 << 10} {
		var blk []byte
		for n := 0; len(blk) < size; n++ {
			blk = fmt.Appendf(blk, `{"id":%d,"text":"fog over the ferry deck %d"}`+"\n", i, n)
		}
		want.Write(blk)
		if err := w.write(blk); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.close(); err != nil {
		t.Fatal(err)
	}
	if got := bytes.Join(dst.calls, nil); !bytes.Equal(got, want.Bytes()) {
		t.Fatalf("%d bytes written, want %d", len(got), want.Len())
	}
	if len(dst.calls) < 4 {
		t.Errorf("only %d writes: the test did not cross the buffer size", len(dst.calls))
	}
	for i, c := range dst.calls {
		if !bytes.HasSuffix(c, []byte("\n")) {
			t.Errorf("write %d of %d bytes ends inside a record: %q", i, len(c), c[max(0, len(c)-40):])
		}
	}
}

// Append adds to the output file; without it the file is replaced.
func TestRunAppend(t *testing.T) {
	path := filepath.Join(t.TempDir(), "out.jsonl")
	in := "ferry at noon\nfog on the quay\n"
	want, _, _ := runString(t, Options{}, in)
	for _, c := range []struct {
		append bool
		want   string
		old    string
	}{
		{false, want, "kept line\n"},
		{true, "kept line\n" + want, "kept line\n"},
		{true, want, ""},
		// A record cut by a killed run gets its line ended; nothing of it is
		// lost and the new records stay whole.
		{true, "{\"id\":1,\"te\n" + want, "{\"id\":1,\"te"},
	} {
		if err := os.WriteFile(path, []byte(c.old), 0o644); err != nil {
			t.Fatal(err)
		}
		if _, _, errs := runString(t, Options{Output: path, Append: c.append}, in); len(errs) > 0 {
			t.Fatal(errs)
		}
		got, err := os.ReadFile(path)
		if err != nil || string(got) != c.want {
			t.Errorf("append %v: %q, %v; want %q", c.append, got, err, c.want)
		}
		if !strings.HasSuffix(string(got), "\n") {
			t.Errorf("append %v: no final newline", c.append)
		}
	}
}
