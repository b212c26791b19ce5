package stream

import (
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func scanAll(t *testing.T, files []string, opt TextOptions) ([]string, TextStats, error) {
	t.Helper()
	var got []string
	st, err := ScanTexts(files, opt, func(b []byte) error {
		got = append(got, string(b))
		return nil
	})
	return got, st, err
}

func TestScanTextsPlain(t *testing.T) {
	dir := t.TempDir()
	long := strings.Repeat("kelp ", 40000) // 200 kB, longer than the read buffer
	data := "first line\r\n\n  \nsecond {\"not\": \"json\"}\n" + long + "\nlast without newline"
	path := filepath.Join(dir, "plain.txt")
	if err := os.WriteFile(path, []byte(data), 0o644); err != nil {
		t.Fatal(err)
	}
	want := []string{"first line", `second {"not": "json"}`, long, "last without newline"}
	for _, tool := range []string{"", "gzip", "zstd", "bzip2"} {
		p := path
		if tool != "" {
			p = filepath.Join(dir, "plain."+tool)
			compressWith(t, tool, []byte(data), p)
		}
		got, st, err := scanAll(t, []string{p}, TextOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(got, want) || st.Records != 4 || st.Blank != 2 || st.Skipped != 0 {
			t.Errorf("%s: %d texts %+v; want %d texts, 2 blank", p, len(got), st, len(want))
		}
	}
}

// Texts found at dotted paths equal what encoding/json decodes there, joined
// with a space; records without text or not valid JSON are counted, with
// file and line.
func TestScanTextsJSON(t *testing.T) {
	lines := []string{
		`{"text": "ferry at nine", "meta": {"body": "from \"Kelpholm\" \u00e9\ud83d\ude00"}}`,
		`{"text": "only text"}`,
		`{"meta": {"body": "only body"}}`,
		`{"text": 12}`,
		`{"text": null, "meta": {"body": null}}`,
		`not json`,
		`{"text": "tab\there", "meta": {"body": "line\nbreak"}}`,
		``,
		`{"text": ["a", "b"]}`,
	}
	path := filepath.Join(t.TempDir(), "chat.jsonl")
	if err := os.WriteFile(path, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	keys := []string{"text", "meta.body"}
	got, st, err := scanAll(t, []string{path}, TextOptions{TextKeys: keys, Report: 10})
	if err != nil {
		t.Fatal(err)
	}
	var want []string
	for _, l := range lines {
		var rec struct {
			Text *string `json:"text"`
			Meta struct {
				Body *string `json:"body"`
			} `json:"meta"`
		}
		if json.Unmarshal([]byte(l), &rec) != nil {
			continue
		}
		var parts []string
		for _, p := range []*string{rec.Text, rec.Meta.Body} {
			if p != nil {
				parts = append(parts, *p)
			}
		}
		if len(parts) > 0 {
			want = append(want, strings.Join(parts, " "))
		}
	}
	if !slices.Equal(got, want) {
		t.Errorf("texts %q\nwant %q", got, want)
	}
	if st.Records != 4 || st.Blank != 1 || st.Skipped != 4 || len(st.Problems) != 4 {
		t.Fatalf("stats %+v; want 4 records, 1 blank, 4 skipped", st)
	}
	wantProblems := []struct {
		line int64
		err  error
	}{{4, ErrNotString}, {5, ErrNoText}, {6, ErrMalformed}, {9, ErrNotString}}
	for i, p := range st.Problems {
		if p.File != path || p.Line != wantProblems[i].line || !errors.Is(p, wantProblems[i].err) {
			t.Errorf("problem %d: %v; want line %d: %v", i, p, wantProblems[i].line, wantProblems[i].err)
		}
	}
}

func TestScanTextsErrors(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "a.txt")
	if err := os.WriteFile(path, []byte("one\ntwo\nthree\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	stop := errors.New("enough")
	n := 0
	st, err := ScanTexts([]string{path, path}, TextOptions{}, func([]byte) error {
		if n++; n == 5 {
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) || st.Records != 5 {
		t.Errorf("fn error: %v after %d records; want %v after 5", err, st.Records, stop)
	}
	var ie *InputError
	if _, err := ScanTexts([]string{filepath.Join(dir, "missing")}, TextOptions{}, func([]byte) error { return nil }); !errors.As(err, &ie) {
		t.Errorf("missing file: %v, want an *InputError", err)
	}
	got, _, err := scanAll(t, []string{"-"}, TextOptions{Stdin: strings.NewReader("from stdin\n")})
	if err != nil || !slices.Equal(got, []string{"from stdin"}) {
		t.Errorf("stdin: %q, %v", got, err)
	}
}
