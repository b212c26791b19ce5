package stream

import (
	"encoding/json"
	"errors"
	"strconv"
	"strings"
	"testing"
	"unicode"
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
		{"tsv CR inside", LabelledTabText, "a\rb\tfare", ErrLabelControl, `-:2: label has a control character: "a\rb"`},
		{"tsv ESC", LabelledTabText, "\x1b[31mred\tfare", ErrLabelControl, `-:2: label has a control character: "\x1b[31mred"`},
		{"tsv empty", LabelledTabText, "\tfare", ErrNoLabel, `-:2: record has no label`},
	} {
		t.Run(c.name, func(t *testing.T) {
			good := `{"text":"fine","label":"ok"}`
			if c.format == LabelledTabText {
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

// Under InputAuto a line that starts with '{' but does not begin the way a
// JSON object does (RFC 8259: '{' then a quoted key or '}') is prose and is
// tagged exactly as --format text tags it; a line that begins like an
// object but is broken stays a malformed record, and --format jsonl keeps
// every invalid line a reject.
func TestAutoBraceProseIsText(t *testing.T) {
	for _, c := range []struct {
		line      string
		format    InputFormat
		text      bool // tagged as a text line
		malformed bool
	}{
		{"{sigh} my card was declined at the ferry desk", InputAuto, true, false},
		{"  {{template}} rain again", InputAuto, true, false},
		{"{sigh} my card was declined", InputJSONL, false, true},
		{`{"text":"fog at the harbour"`, InputAuto, false, true},
		{`{ "text" fog`, InputAuto, false, true},
		{`{} fog`, InputAuto, false, true},
		{"\x1e{sigh}", InputAuto, false, true},
	} {
		in := "{\"text\":\"ferry\"}\n" + c.line + "\nwind\n"
		got, st, _ := runString(t, Options{Format: c.format, Jobs: 1}, in)
		lines := strings.Split(got, "\n")
		if len(lines) != 4 {
			t.Fatalf("%q: %d lines out: %q", c.line, len(lines)-1, got)
		}
		if c.text {
			want, _, _ := runString(t, Options{Format: InputText, Jobs: 1}, c.line+"\n")
			if lines[1]+"\n" != want {
				t.Errorf("%q: written %q, --format text writes %q", c.line, lines[1], want)
			}
		} else if lines[1] != c.line {
			t.Errorf("%q: written %q, want it unchanged", c.line, lines[1])
		}
		wantText, wantMal := int64(1), int64(0) // "wind" is text
		if c.text {
			wantText++
		}
		if c.malformed {
			wantMal = 1
		}
		if c.format == InputJSONL {
			wantText, wantMal = 0, 2 // "wind" is malformed too
		}
		if st.Text != wantText || st.Malformed != wantMal || st.Records != 3 {
			t.Errorf("%q: %d text, %d malformed of %d; want %d, %d of 3", c.line, st.Text, st.Malformed, st.Records, wantText, wantMal)
		}
	}
}

// wordTagger is keywordTagger whose scorers count words: runs of letters
// or digits.
type wordTagger struct{ *keywordTagger }

func (t wordTagger) NewScorer() Scorer {
	return &wordScorer{keywordScorer: t.keywordTagger.NewScorer().(*keywordScorer)}
}

type wordScorer struct {
	*keywordScorer
	words int
}

func (s *wordScorer) Score(text []byte) []float32 {
	s.words = len(strings.FieldsFunc(string(text), func(r rune) bool { return !unicode.IsLetter(r) && !unicode.IsDigit(r) }))
	return s.keywordScorer.Score(text)
}

func (s *wordScorer) Words() int { return s.words }

// A text without a word gets the unsure tag, confidence 0 and no scores,
// whether it is a JSON value or a text line; blank lines still pass
// through untouched.
func TestNoWordsIsUnsure(t *testing.T) {
	for _, c := range []struct {
		line    string
		noWords bool
	}{
		{`{"text":"!!!"}`, true},
		{`{"text":""}`, true},
		{`{"text":" \t "}`, true},
		{`{"text":"?!","more":"x"}`, true},
		{`{"text":"ferry!!!"}`, false},
		{`{"text":"wind"}`, false},
	} {
		for _, format := range []InputFormat{InputAuto, InputText} {
			in := c.line + "\n"
			got, st, errs := runString(t, Options{Tagger: wordTagger{newKeywordTagger()}, Format: format, Emit: EmitJSONL, Scores: true, Top: 2, UnsureTag: "hmm", Jobs: 1}, in)
			if len(errs) > 0 {
				t.Fatal(errs)
			}
			var rec struct {
				Text       string
				Tag        string
				Confidence float64
				Scores     map[string]float64
				Top        []any
			}
			// encoding/json is the reference reader of the output.
			if err := json.Unmarshal([]byte(got), &rec); err != nil {
				t.Fatalf("%q: output %q: %v", c.line, got, err)
			}
			// Under InputText the whole line is the text, and its key
			// is a word.
			empty := c.noWords && format == InputAuto
			if empty != (rec.Tag == "hmm") || empty != (st.NoWords == 1) || st.Tags["hmm"] != st.NoWords {
				t.Errorf("%q format %d: tag %q, %d no words, tags %v; no words: %v", c.line, format, rec.Tag, st.NoWords, st.Tags, empty)
			}
			if empty && (rec.Confidence != 0 || len(rec.Scores) != 0 || len(rec.Top) != 0) {
				t.Errorf("%q: confidence %v, scores %v, top %v; want 0 and none", c.line, rec.Confidence, rec.Scores, rec.Top)
			}
			if !empty && (rec.Confidence == 0 || len(rec.Scores) != 3) {
				t.Errorf("%q: confidence %v, scores %v", c.line, rec.Confidence, rec.Scores)
			}
		}
	}
	for _, line := range []string{"...", "¡¿—!"} {
		got, st, _ := runString(t, Options{Tagger: wordTagger{newKeywordTagger()}, Jobs: 1}, line+"\n\n  \n")
		if want := "unsure\t0.0000\t" + line + "\n\n  \n"; got != want || st.NoWords != 1 || st.Blank != 2 {
			t.Errorf("%q: %q (%d no words, %d blank), want %q", line, got, st.NoWords, st.Blank, want)
		}
	}
}

// A wrong text key: when none of the first 1,000 JSON records (or of all,
// when fewer) has a value at any key, Warn is told once, with the keys the
// records have; every record still passes through unchanged.
func TestWrongTextKeyWarns(t *testing.T) {
	recs := func(n int, f func(i int) string) string {
		var b strings.Builder
		for i := range n {
			b.WriteString(f(i) + "\n")
		}
		return b.String()
	}
	plain := func(i int) string {
		return `{"message":"fog at the quay","ts":` + strconv.Itoa(i) + `,"host":"pier-2"}`
	}
	textAt := func(k int) func(int) string {
		return func(i int) string {
			if i == k {
				return `{"msg":"wind","ts":1}`
			}
			return plain(i)
		}
	}
	for _, c := range []struct {
		name string
		in   string
		keys []string
		want string // "" for no warning
	}{
		{"1,500 without the key", recs(1500, plain), []string{"msg"}, `none of the first 1,000 JSON records has text at "msg"; their keys: message, ts, host`},
		{"exactly 1,000", recs(1000, plain), []string{"msg"}, `none of the first 1,000 JSON records has text at "msg"; their keys: message, ts, host`},
		{"fewer", recs(3, plain), []string{"msg", "body.text"}, `none of the 3 JSON records has text at "msg" or "body.text"; their keys: message, ts, host`},
		{"one", recs(1, plain), nil, `the only JSON record has no text at "text"; their keys: message, ts, host`},
		{"text in record 1,000", recs(1200, textAt(999)), []string{"msg"}, ""},
		{"text in record 1,001 only", recs(1200, textAt(1000)), []string{"msg"}, `none of the first 1,000 JSON records has text at "msg"; their keys: message, ts, host`},
		{"key present, not a string", recs(5, func(i int) string { return `{"msg":5}` }), []string{"msg"}, ""},
		{"text lines only", recs(5, func(i int) string { return "ferry late" }), []string{"msg"}, ""},
		{"null is no text", recs(2, func(i int) string { return `{"msg":null,"m":"x"}` }), []string{"msg"}, `none of the 2 JSON records has text at "msg"; their keys: msg, m`},
		{"keys of later records, escaped and odd", recs(3, func(i int) string {
			return []string{`{"a":1}`, `{"b\u00e9":2,"a":3}`, `{"two words":1,"":2,"new\nline":3}`}[i]
		}), nil, `none of the 3 JSON records has text at "text"; their keys: a, bé, "two words", "", "new\nline"`},
		{"many keys", recs(20, func(i int) string { return `{"k` + strconv.Itoa(i) + `":1}` }), nil,
			`none of the 20 JSON records has text at "text"; their keys: k0, k1, k2, k3, k4, k5, k6, k7, k8, k9, k10, k11 and 8 more`},
		{"no keys", recs(2, func(i int) string { return `{}` }), nil, `none of the 2 JSON records has text at "text"; they have no keys`},
	} {
		for _, jobs := range []int{1, 3} {
			var warns []string
			o := Options{TextKeys: c.keys, Jobs: jobs, BlockSize: 700, Warn: func(m string) { warns = append(warns, m) }}
			out, _, _ := runString(t, o, c.in)
			if c.want == "" && len(warns) != 0 || c.want != "" && (len(warns) != 1 || warns[0] != c.want) {
				t.Errorf("%s -j %d: warnings %q, want %q", c.name, jobs, warns, c.want)
			}
			// Every record without text passes through unchanged.
			inLines, outLines := strings.Split(c.in, "\n"), strings.Split(out, "\n")
			if len(outLines) != len(inLines) {
				t.Fatalf("%s -j %d: %d lines out of %d", c.name, jobs, len(outLines), len(inLines))
			}
			for i := range inLines {
				if c.want != "" && inLines[i] != outLines[i] && !strings.Contains(inLines[i], `"msg":"wind"`) {
					t.Errorf("%s -j %d: line %d changed: %q", c.name, jobs, i+1, outLines[i])
					break
				}
			}
		}
	}
}
