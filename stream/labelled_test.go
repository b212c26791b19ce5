package stream

import (
	"bytes"
	"compress/gzip"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
)

func TestReadLabelled(t *testing.T) {
	type rec struct {
		text   string
		labels []string
		line   int64
	}
	for _, tc := range []struct {
		name     string
		in       string
		opt      LabelledOptions
		want     []rec
		skipped  int
		blank    int
		problems []error
	}{
		{
			name: "defaults",
			in:   `{"text":"fare to the north quay","label":"tickets"}` + "\n" + `{"label":"spam","text":"win a prize"}` + "\r\n",
			want: []rec{{"fare to the north quay", []string{"tickets"}, 1}, {"win a prize", []string{"spam"}, 2}},
		},
		{
			name: "nested and repeated keys",
			in:   `{"msg":{"subject":"lost","body":"a red scarf"},"tags":["lost-and-found","praise"]}` + "\n" + `{"msg":{"body":"only a body"},"tags":["x"]}`,
			opt:  LabelledOptions{TextKeys: []string{"msg.subject", "msg.body"}, LabelKey: "tags"},
			want: []rec{{"lost a red scarf", []string{"lost-and-found", "praise"}, 1}, {"only a body", []string{"x"}, 2}},
		},
		{
			name: "numbers and array index",
			in:   `{"text":"ok","class":1}` + "\n" + `{"t":["a","b"],"class":0}`,
			opt:  LabelledOptions{TextKeys: []string{"text", "t.1"}, LabelKey: "class"},
			want: []rec{{"ok", []string{"1"}, 1}, {"b", []string{"0"}, 2}},
		},
		{
			name:     "bad records are counted and reported",
			in:       "{\"text\":\"fine\",\"label\":\"a\"}\n\n{\"label\":\"a\"}\n{\"text\":\"x\"}\n{\"text\":\"x\",\"label\":{}}\n{\"text\":5,\"label\":\"a\"}\nnot json\n{\"text\":\" \",\"label\":\"a\"}\n{\"text\":\"y\",\"label\":[]}\n",
			want:     []rec{{"fine", []string{"a"}, 1}},
			skipped:  7,
			blank:    1,
			problems: []error{ErrNoText, ErrNoLabel, ErrBadLabel, ErrNotString, ErrMalformed},
		},
		{
			name:     "tsv",
			in:       "schedule\twhen is the first boat\n\tno label\nno tab here\npraise\tlovely crew\tand tabs\n",
			opt:      LabelledOptions{Format: LabelledTabText},
			want:     []rec{{"when is the first boat", []string{"schedule"}, 1}, {"lovely crew\tand tabs", []string{"praise"}, 4}},
			skipped:  2,
			problems: []error{ErrNoLabel, ErrNoTab},
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			opt := tc.opt
			opt.Stdin = strings.NewReader(tc.in)
			set, err := ReadLabelled([]string{"-"}, opt)
			if err != nil {
				t.Fatal(err)
			}
			var got []rec
			for _, r := range set.Records {
				if r.File != "-" {
					t.Errorf("file %q", r.File)
				}
				got = append(got, rec{r.Text, r.Labels, r.Line})
			}
			if !reflect.DeepEqual(got, tc.want) {
				t.Errorf("records %v, want %v", got, tc.want)
			}
			if set.Skipped != tc.skipped || set.Blank != tc.blank {
				t.Errorf("skipped %d blank %d, want %d %d", set.Skipped, set.Blank, tc.skipped, tc.blank)
			}
			if len(set.Problems) != len(tc.problems) {
				t.Fatalf("problems %v, want %d", set.Problems, len(tc.problems))
			}
			for i, p := range set.Problems {
				if !errors.Is(p, tc.problems[i]) {
					t.Errorf("problem %d = %v, want %v", i, p, tc.problems[i])
				}
			}
		})
	}
}

func TestReadLabelledFiles(t *testing.T) {
	dir := t.TempDir()
	plain := filepath.Join(dir, "a.jsonl")
	os.WriteFile(plain, []byte(`{"text":"one","label":"x"}`+"\n"+`{"text":"two","label":"y"}`+"\n"), 0o644)
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write([]byte(`{"text":"three","label":"x"}` + "\n" + `{"text":"bad"}` + "\n"))
	zw.Close()
	gzName := filepath.Join(dir, "b.data") // compression is sniffed, not named
	os.WriteFile(gzName, gz.Bytes(), 0o644)
	var zs bytes.Buffer
	ze, _ := zstd.NewWriter(&zs)
	ze.Write([]byte(`{"text":"four","label":"z"}`))
	ze.Close()
	zsName := filepath.Join(dir, "c.zst")
	os.WriteFile(zsName, zs.Bytes(), 0o644)

	set, err := ReadLabelled([]string{plain, gzName, zsName}, LabelledOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var texts []string
	for _, r := range set.Records {
		texts = append(texts, r.Text)
	}
	if want := []string{"one", "two", "three", "four"}; !reflect.DeepEqual(texts, want) {
		t.Errorf("texts %q, want %q", texts, want)
	}
	if len(set.Problems) != 1 || set.Problems[0].File != gzName || set.Problems[0].Line != 2 {
		t.Errorf("problems %v, want %s:2", set.Problems, gzName)
	}
	if want := []string{"y", "z"}; !reflect.DeepEqual(set.Rare(), want) {
		t.Errorf("rare %q, want %q", set.Rare(), want)
	}
	if c := set.Counts(); c["x"] != 2 || c["y"] != 1 {
		t.Errorf("counts %v", c)
	}

	empty := filepath.Join(dir, "empty.jsonl")
	os.WriteFile(empty, []byte("{\"text\":\"no label\"}\n"), 0o644)
	_, err = ReadLabelled([]string{empty, plain + ".missing"}, LabelledOptions{})
	var ie *InputError
	if !errors.As(err, &ie) || ie.File != plain+".missing" {
		t.Errorf("missing file: %v", err)
	}
	_, err = ReadLabelled([]string{empty}, LabelledOptions{})
	if !errors.Is(err, ErrNoRecords) || !strings.Contains(err.Error(), empty) {
		t.Errorf("no records: %v", err)
	}
	if _, err := ReadLabelled([]string{plain}, LabelledOptions{Format: "yaml"}); !errors.Is(err, ErrUnknownForm) {
		t.Errorf("format: %v", err)
	}
}

// FuzzReadLabelled checks that every line is accounted for: a record, a
// skipped record or a blank line, and that nothing panics.
func FuzzReadLabelled(f *testing.F) {
	f.Add([]byte("{\"text\":\"a\",\"label\":[\"b\",\"c\"]}\n\nx\n"), false)
	f.Add([]byte("lbl\ttext\nnotab\n"), true)
	f.Fuzz(func(t *testing.T, b []byte, tsv bool) {
		opt := LabelledOptions{Stdin: bytes.NewReader(b), TextKeys: []string{"text", "m.0"}}
		if tsv {
			opt.Format = LabelledTabText
		}
		set, err := ReadLabelled([]string{"-"}, opt)
		if set == nil {
			if err == nil {
				t.Fatal("nil set without error")
			}
			return
		}
		lines := bytes.Count(b, []byte{'\n'})
		if len(b) > 0 && b[len(b)-1] != '\n' {
			lines++
		}
		if bytes.HasPrefix(b, []byte{0x1f, 0x8b}) || bytes.HasPrefix(b, []byte{0x28, 0xb5, 0x2f, 0xfd}) || bytes.HasPrefix(b, []byte("BZh")) {
			return // decompressed: line count differs
		}
		if n := len(set.Records) + set.Skipped + set.Blank; n != lines {
			t.Fatalf("%d records + %d skipped + %d blank for %d lines", len(set.Records), set.Skipped, set.Blank, lines)
		}
	})
}

// TestReadLabelledTagArrays: arrays are counted (for train's automatic
// multi-label mode) and, under EmptyTags, an empty array is a record with
// no tag; without it, it is a record without a label, as before.
func TestReadLabelledTagArrays(t *testing.T) {
	in := `{"text":"refund the cancelled boat","label":["tickets","schedule"]}
{"text":"nice sunset","label":[]}
{"text":"lost a scarf","label":"lost-and-found"}
{"text":"no label at all"}
{"text":"one in an array","label":[ "praise" ]}
`
	path := filepath.Join(t.TempDir(), "tags.jsonl")
	if err := os.WriteFile(path, []byte(in), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, empty := range []bool{false, true} {
		set, err := ReadLabelled([]string{path}, LabelledOptions{EmptyTags: empty})
		if err != nil {
			t.Fatal(err)
		}
		var got [][]string
		for _, r := range set.Records {
			got = append(got, r.Labels)
		}
		want := [][]string{{"tickets", "schedule"}, {"lost-and-found"}, {"praise"}}
		wantArrays, wantSkipped, wantNone := 2, 2, 0
		if empty {
			want = [][]string{{"tickets", "schedule"}, {}, {"lost-and-found"}, {"praise"}}
			wantArrays, wantSkipped, wantNone = 3, 1, 1
		}
		if !reflect.DeepEqual(got, want) || set.Arrays != wantArrays || set.Skipped != wantSkipped || set.NoTags != wantNone || set.Multi != 1 {
			t.Errorf("EmptyTags %v: labels %q, arrays %d, skipped %d, no tags %d, multi %d", empty, got, set.Arrays, set.Skipped, set.NoTags, set.Multi)
		}
		if c := set.Counts(); c["tickets"] != 1 || len(c) != 3 {
			t.Errorf("counts %v", c)
		}
	}
}
