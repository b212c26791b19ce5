package stream

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// oddRecords are lines every reader of records must see alike: a BOM
// before the first, json-seq separators, journal byte arrays, nested and
// repeated text keys, CRLF, blank lines, null text, wrong types.
var oddRecords = []string{
	"\ufeff" + `{"text":"first after a byte-order mark"}`,
	"\x1e" + `{"text":"a json-seq record","meta":{"body":"with a body"}}`,
	`{"text":[104,97,114,98,111,117,114,32,255,254],"n":1}`, // journal bytes, not UTF-8
	`{"meta":{"body":"only the nested key"}}`,
	"",
	`{"text":"crlf ended"}` + "\r",
	`{"text":null,"meta":{"body":null}}`,
	`{"text":12}`,
	`{"text":{"a":"b"},"meta":{"body":"a body beside an object"}}`,
	"   \t",
	`{"text":"tab\tinside \"quotes\" \u00e9\ud83d\ude00"}`,
	`{"text":"   "}`,
	`{"other":"no text key"}`,
	`{"text": "cut`,
	`{"text":[1,2,300]}`,
	`{"text":"a lone` + "\r" + ` carriage return"}`,
	`{"text":"last, without a newline"}`,
}

// oddText is what encoding/json (the reference) finds in line at keys:
// the strings (or byte arrays) joined with a space, and whether the line
// is a record with text. The BOM and a json-seq separator are cut first,
// as the byte-order mark and RFC 7464 say.
func oddText(t *testing.T, line string, keys []string) (string, bool) {
	t.Helper()
	line = strings.TrimPrefix(line, "\ufeff")
	line = strings.TrimPrefix(line, "\x1e")
	line = strings.TrimSuffix(line, "\r")
	var v any
	if json.Unmarshal([]byte(line), &v) != nil {
		return "", false
	}
	var parts []string
	for _, k := range keys {
		x := v
		for _, name := range strings.Split(k, ".") {
			m, _ := x.(map[string]any)
			x = m[name]
		}
		switch x := x.(type) {
		case string:
			parts = append(parts, x)
		case []any:
			var b []byte
			for _, e := range x {
				f, ok := e.(float64)
				if !ok || f != float64(int(f)) || f < 0 || f > 255 {
					b = nil
					break
				}
				b = append(b, byte(f))
			}
			if b != nil {
				parts = append(parts, string(b))
			}
		}
	}
	text := strings.Join(parts, " ")
	return text, len(parts) > 0 && strings.TrimSpace(text) != ""
}

func writeOdd(t *testing.T) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "odd.jsonl")
	if err := os.WriteFile(p, []byte(strings.Join(oddRecords, "\n")), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestReaderOddRecords checks the Reader's texts and problem lines against
// encoding/json's reading of the same records.
func TestReaderOddRecords(t *testing.T) {
	keys := []string{"text", "meta.body"}
	path := writeOdd(t)
	type got struct {
		line int64
		text string
	}
	var want []got
	var wantBad []int64
	for i, l := range oddRecords {
		if isBlank([]byte(l)) {
			continue
		}
		if text, ok := oddText(t, l, keys); ok {
			want = append(want, got{int64(i + 1), text})
		} else {
			wantBad = append(wantBad, int64(i+1))
		}
	}
	r, err := OpenReader([]string{path}, ReaderOptions{Format: InputJSONL, TextKeys: keys})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var recs []got
	var bad []int64
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		var re *RecordError
		if errors.As(err, &re) {
			if re.File != path {
				t.Errorf("record error names %q, want %q", re.File, path)
			}
			bad = append(bad, re.Line)
			continue
		}
		if err != nil {
			t.Fatal(err)
		}
		recs = append(recs, got{rec.Line, string(rec.Text)})
	}
	if !slices.Equal(recs, want) {
		t.Errorf("records\n got %+v\nwant %+v", recs, want)
	}
	if !slices.Equal(bad, wantBad) {
		t.Errorf("problem lines %v, want %v", bad, wantBad)
	}
	if r.Blank() != 2 {
		t.Errorf("%d blank lines, want 2", r.Blank())
	}
	if _, err := r.Read(); err != io.EOF {
		t.Errorf("Read after the end: %v, want io.EOF", err)
	}
}

// TestReaderAgreesWithRun: tag's pipeline scores exactly the texts the
// Reader yields (a text of spaces aside: tag tags it unsure, a Reader
// reports it as no text), and reports the same lines as problems, except
// that tag passes a record without any text key through silently.
func TestReaderAgreesWithRun(t *testing.T) {
	keys := []string{"text", "meta.body"}
	path := writeOdd(t)
	for _, format := range []InputFormat{InputJSONL, InputAuto} {
		rt := &recordingTagger{keywordTagger: newKeywordTagger()}
		var runBad []int64
		opts := Options{Tagger: rt, Jobs: 1, Format: format, TextKeys: keys, OnError: func(err error) {
			var re *RecordError
			if errors.As(err, &re) {
				runBad = append(runBad, re.Line)
			}
		}}
		if _, err := Run(context.Background(), opts, []string{path}, nil, io.Discard); err != nil {
			t.Fatal(err)
		}
		r, err := OpenReader([]string{path}, ReaderOptions{Format: format, TextKeys: keys})
		if err != nil {
			t.Fatal(err)
		}
		var texts []string
		var bad []int64
		for {
			rec, err := r.Read()
			if err == io.EOF {
				break
			}
			var re *RecordError
			if errors.As(err, &re) {
				if errors.Is(err, ErrNoText) {
					if text := oddRecords[re.Line-1]; strings.Contains(text, `"   "`) {
						texts = append(texts, "   ")
					}
					continue
				}
				bad = append(bad, re.Line)
				continue
			}
			if err != nil {
				t.Fatal(err)
			}
			texts = append(texts, string(rec.Text))
		}
		r.Close()
		if !slices.Equal(rt.texts, texts) {
			t.Errorf("format %d: tag scored\n %q\nthe Reader read\n %q", format, rt.texts, texts)
		}
		if !slices.Equal(runBad, bad) {
			t.Errorf("format %d: tag reported lines %v, the Reader %v", format, runBad, bad)
		}
	}
}

func TestReaderErrors(t *testing.T) {
	r, err := OpenReader([]string{filepath.Join(t.TempDir(), "missing.jsonl")}, ReaderOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var ie *InputError
	if _, err := r.Read(); !errors.As(err, &ie) {
		t.Errorf("missing file: %v, want an *InputError", err)
	}
	if _, err := r.Read(); !errors.As(err, &ie) {
		t.Errorf("second Read after an input error: %v, want the same error", err)
	}
	if _, err := OpenReader(nil, ReaderOptions{TextKeys: []string{""}}); err == nil {
		t.Error("an empty text key was accepted")
	}
	rd, err := NewReader(strings.NewReader("{\"text\":\"x\"}\n"+strings.Repeat("y", 100)+"\n"), "mem", ReaderOptions{MaxLine: 50})
	if err != nil {
		t.Fatal(err)
	}
	if rec, err := rd.Read(); err != nil || string(rec.Text) != "x" || rec.File != "mem" || rec.Line != 1 {
		t.Errorf("first: %+v %v", rec, err)
	}
	_, err = rd.Read()
	var re *RecordError
	if !errors.As(err, &re) || !errors.Is(err, ErrTooLong) || re.Line != 2 || re.Error() != "mem:2: line too long (over 50 bytes)" {
		t.Errorf("long line: %v", err)
	}
}

// FuzzReader: every line of the input is a record, a problem or blank,
// each once, with its bytes (records rejoined equal the input's lines).
func FuzzReader(f *testing.F) {
	for _, l := range oddRecords {
		f.Add([]byte(l + "\n" + l))
	}
	f.Add([]byte("a\r\n\r\n\x1e{}\n{\"text\":[]}\n"))
	f.Fuzz(func(t *testing.T, in []byte) {
		for _, format := range []InputFormat{InputAuto, InputJSONL, InputText} {
			r, err := NewReader(bytes.NewReader(in), "f", ReaderOptions{Format: format})
			if err != nil {
				t.Fatal(err)
			}
			lines := bytes.Split(in, []byte("\n"))
			// A CR is part of the terminator only before a LF.
			for i := range len(lines) - 1 {
				lines[i] = bytes.TrimSuffix(lines[i], []byte("\r"))
			}
			if len(lines[len(lines)-1]) == 0 {
				lines = lines[:len(lines)-1]
			}
			var n int64
			for {
				rec, err := r.Read()
				if err == io.EOF {
					break
				}
				var re *RecordError
				if errors.As(err, &re) {
					n++
					continue
				}
				if err != nil {
					t.Fatal(err)
				}
				n++
				if want := lines[rec.Line-1]; !bytes.Equal(rec.Raw, want) {
					t.Fatalf("line %d: raw %q, want %q", rec.Line, rec.Raw, want)
				}
				if len(bytes.TrimSpace(rec.Text)) == 0 {
					t.Fatalf("line %d: a record without text", rec.Line)
				}
			}
			if n+r.Blank() != int64(len(lines)) {
				t.Fatalf("format %d: %d records and problems and %d blank, want %d lines", format, n, r.Blank(), len(lines))
			}
		}
	})
}
