package main

import (
	"encoding/json"
	"maps"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
)

// oddLine is one line of the odd input: every record has a label, so a
// record is skipped by train and eval only for want of text.
type oddLine struct {
	line   string
	reason string // why a reader finds no text; "" when the line has text
}

// oddInput holds the records every command must read alike: a BOM, a
// json-seq separator, journal byte arrays, nested and repeated text keys,
// CRLF, blank lines, null text and wrong types. Its texts have no tab and
// no newline, so each can be written as a plain line as well.
var oddInput = []oddLine{
	{line: "\ufeff" + `{"text":"when does the first ferry leave","label":"schedule"}`},
	{line: "\x1e" + `{"text":"my ticket was charged twice","meta":{"body":"refund please"},"label":"tickets"}`},
	{line: `{"text":[116,104,101,32,108,97,116,101,32,98,111,97,116,32,255],"label":"schedule"}`},
	{line: `{"meta":{"body":"lost a scarf on the upper deck"},"label":"lost-and-found"}`},
	{line: ""},
	{line: `{"text":"the crew were lovely","label":"praise"}` + "\r"},
	{line: `{"text":null,"meta":{"body":null},"label":"praise"}`, reason: "no text"},
	{line: `{"text":12,"label":"tickets"}`, reason: "not a string"},
	{line: "   "},
	{line: `{"text":{"x":1},"meta":{"body":"win a free cruise now","skip":1},"label":"spam"}`},
	{line: `{"text":"  ","label":"spam"}`, reason: "no text"},
	{line: `{"text": "cut short`, reason: "malformed"},
	{line: "\x1e" + `{"text":"is the evening boat \u00e9 on time","label":"schedule"}`},
	{line: `{"text":"cheap pills online","label":"spam"}`},
}

// oddWant is, by encoding/json (the reference), each line's text at the
// keys text and meta.body, joined with a space; ok is false where a
// reader finds none (blank lines aside).
func oddWant(t *testing.T, l oddLine) (text, label string, ok bool) {
	t.Helper()
	s := strings.TrimSuffix(strings.TrimPrefix(strings.TrimPrefix(l.line, "\ufeff"), "\x1e"), "\r")
	var rec struct {
		Text  json.RawMessage
		Meta  struct{ Body json.RawMessage }
		Label string
	}
	if json.Unmarshal([]byte(s), &rec) != nil {
		return "", "", false
	}
	var parts []string
	for _, raw := range []json.RawMessage{rec.Text, rec.Meta.Body} {
		var str string
		var bytes []byte
		var nums []uint8
		switch {
		case json.Unmarshal(raw, &str) == nil && string(raw) != "null":
			parts = append(parts, str)
		case json.Unmarshal(raw, &nums) == nil && string(raw) != "null" && raw[0] == '[':
			for _, n := range nums {
				bytes = append(bytes, n)
			}
			parts = append(parts, string(bytes))
		}
	}
	text = strings.Join(parts, " ")
	return text, rec.Label, strings.TrimSpace(text) != ""
}

// TestCommandsAgreeOnRecords: tag, train, eval, embed and inspect
// --ngrams see the same texts in the odd records as in the same texts
// written plainly, and name the same lines as having none.
func TestCommandsAgreeOnRecords(t *testing.T) {
	fixture(t)
	dir := t.TempDir()
	var odd, plain, tsv []string
	var tagged []string // tag and confidence of each record with text, in order
	var wantBad []int   // lines without text
	for i, l := range oddInput {
		odd = append(odd, l.line)
		text, label, ok := oddWant(t, l)
		blank := strings.TrimSpace(l.line) == ""
		switch {
		case !blank && ok != (l.reason == ""):
			t.Fatalf("line %d: the reference says text %q, the table %q", i+1, text, l.reason)
		case ok:
			plain = append(plain, text)
			tsv = append(tsv, label+"\t"+text)
		case !blank:
			wantBad = append(wantBad, i+1)
		}
	}
	write := func(name string, lines []string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	oddPath, plainPath, tsvPath := write("odd.jsonl", odd), write("plain.txt", plain), write("plain.tsv", tsv)
	keys := []string{"--text-key", "text", "--text-key", "meta.body"}
	// badLines are the lines named in stderr's "odd.jsonl:N:" problems.
	badLines := func(stderr string) []int {
		var n []int
		for _, l := range strings.Split(stderr, "\n") {
			_, rest, ok := strings.Cut(l, "odd.jsonl:")
			if !ok {
				continue
			}
			var k int
			for _, c := range rest {
				if c < '0' || c > '9' {
					break
				}
				k = k*10 + int(c-'0')
			}
			n = append(n, k)
		}
		return n
	}
	mustRun := func(t *testing.T, args ...string) (string, string) {
		t.Helper()
		code, out, errs := runCmd(t, "", args...)
		if code != exitOK {
			t.Fatalf("%v: exit %d: %s", args, code, errs)
		}
		return out, errs
	}

	t.Run("tag", func(t *testing.T) {
		out, errs := mustRun(t, append([]string{"tag", "-m", evalModel, "-j", "1", "--format", "jsonl", oddPath}, keys...)...)
		ref, _ := mustRun(t, "tag", "-m", evalModel, "-j", "1", "--format", "text", plainPath)
		for _, l := range strings.Split(strings.TrimSuffix(ref, "\n"), "\n") {
			f := strings.SplitN(l, "\t", 3)
			tagged = append(tagged, f[0]+" "+f[1])
		}
		var got []string
		for _, l := range strings.Split(strings.TrimSuffix(out, "\n"), "\n") {
			var rec struct {
				Tag        string
				Confidence json.Number
			}
			if json.Unmarshal([]byte(strings.TrimPrefix(strings.TrimPrefix(strings.TrimSuffix(l, "\r"), "\ufeff"), "\x1e")), &rec) == nil && rec.Tag != "" {
				got = append(got, rec.Tag+" "+rec.Confidence.String())
			}
		}
		// The text of spaces is tagged (unsure, confidence 0) where the
		// readers skip it.
		got = slices.DeleteFunc(got, func(s string) bool { return s == "unsure 0.0000" })
		if !slices.Equal(got, tagged) {
			t.Errorf("tags of the odd records\n %q\nof the plain texts\n %q", got, tagged)
		}
		// tag passes a record without any text through untouched without
		// a word, and reports the others.
		if b := badLines(errs); !slices.Equal(b, []int{8, 12}) {
			t.Errorf("tag named lines %v, want 8 and 12: %s", b, errs)
		}
	})
	t.Run("train", func(t *testing.T) {
		train := []string{"train", "-q", "-j", "1", "--seed", "3", "--epochs", "2", "--vector-size", "8", "--filters", "4", "--dev-fraction", "0.5", "--no-fold"}
		mA, mB := filepath.Join(dir, "odd.safetensors"), filepath.Join(dir, "plain.safetensors")
		_, errs := mustRun(t, append(append(train, "-o", mA, oddPath), keys...)...)
		mustRun(t, append(train, "-o", mB, "--format", "label-tab-text", tsvPath)...)
		if b := badLines(errs); !slices.Equal(b, wantBad) {
			t.Errorf("train named lines %v, want %v: %s", b, wantBad, errs)
		}
		a, _ := mustRun(t, "tag", "-m", mA, "-j", "1", "--format", "text", plainPath)
		b, _ := mustRun(t, "tag", "-m", mB, "-j", "1", "--format", "text", plainPath)
		if a != b {
			t.Errorf("the models trained on the odd and the plain records tag differently:\n%s\n%s", a, b)
		}
	})
	t.Run("eval", func(t *testing.T) {
		out, errs := mustRun(t, append([]string{"eval", "--json", "-m", evalModel, oddPath}, keys...)...)
		ref, _ := mustRun(t, "eval", "--json", "--format", "label-tab-text", "-m", evalModel, tsvPath)
		if b := badLines(errs); !slices.Equal(b, wantBad) {
			t.Errorf("eval named lines %v, want %v: %s", b, wantBad, errs)
		}
		var got, want map[string]any
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal([]byte(ref), &want); err != nil {
			t.Fatal(err)
		}
		for _, k := range []string{"files", "skipped"} {
			delete(got, k)
			delete(want, k)
		}
		if !reflect.DeepEqual(got, want) {
			t.Errorf("eval of the odd records differs from the plain ones in %v", diffKeys(got, want))
		}
	})
	t.Run("embed", func(t *testing.T) {
		embed := []string{"embed", "-q", "-j", "1", "--seed", "5", "--vector-size", "4", "--min-seen", "1", "--passes", "2", "-o", "-"}
		out, errs := mustRun(t, append(append(embed, oddPath), keys...)...)
		ref, _ := mustRun(t, append(embed, plainPath)...)
		if out != ref {
			t.Errorf("vectors from the odd records differ from the plain ones")
		}
		if b := badLines(errs); !slices.Equal(b, wantBad) {
			t.Errorf("embed named lines %v, want %v: %s", b, wantBad, errs)
		}
	})
	t.Run("inspect", func(t *testing.T) {
		out, errs := mustRun(t, append([]string{"inspect", evalModel, "--json", "--ngrams", "3", "--sample", oddPath}, keys...)...)
		ref, _ := mustRun(t, "inspect", evalModel, "--json", "--ngrams", "3", "--sample", plainPath)
		if b := badLines(errs); !slices.Equal(b, wantBad) {
			t.Errorf("inspect named lines %v, want %v: %s", b, wantBad, errs)
		}
		var got, want struct{ Sample map[string]any }
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal([]byte(ref), &want); err != nil {
			t.Fatal(err)
		}
		for _, k := range []string{"files", "skipped"} {
			delete(got.Sample, k)
			delete(want.Sample, k)
		}
		if !reflect.DeepEqual(got.Sample, want.Sample) || len(want.Sample) == 0 {
			t.Errorf("n-grams of the odd records differ from the plain ones in %v", diffKeys(got.Sample, want.Sample))
		}
	})
}

func diffKeys(a, b map[string]any) []string {
	var d []string
	for _, k := range slices.Sorted(maps.Keys(a)) {
		if !reflect.DeepEqual(a[k], b[k]) {
			d = append(d, k)
		}
	}
	return d
}
