package stream

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"unicode/utf8"
)

// The format facts these tests rely on come from systemd's documentation
// of the journal's JSON export ("Journal JSON Format" in
// docs/JOURNAL_EXPORT_FORMATS.md, systemd.io/JOURNAL_EXPORT_FORMATS): keys
// are the journal's field names (MESSAGE, PRIORITY, _SYSTEMD_UNIT,
// __REALTIME_TIMESTAMP, ...), values are strings, except that a field with
// non-printable or non-UTF-8 bytes is an array of the byte values 0..255, a
// field too large to show is null, and a field with several values is an
// array of them. journalctl(1) says -o json-seq puts an ASCII record
// separator (0x1E) before each record, as JSON text sequences (RFC 7464)
// do.

// recordingTagger is a keywordTagger that keeps every text it is asked to
// score, in order when the pipeline runs with one job.
type recordingTagger struct {
	*keywordTagger
	mu    sync.Mutex
	texts []string
}

func (r *recordingTagger) NewScorer() Scorer {
	return recordingScorer{r, r.keywordTagger.NewScorer()}
}

type recordingScorer struct {
	r  *recordingTagger
	sc Scorer
}

func (s recordingScorer) Score(text []byte) []float32 {
	s.r.mu.Lock()
	s.r.texts = append(s.r.texts, string(text))
	s.r.mu.Unlock()
	return s.sc.Score(text)
}

// journalText is what the documentation says a MESSAGE value means, decoded
// with encoding/json: a string, or the bytes of an array of numbers. ok is
// false for null, a missing key and anything else.
func journalText(t *testing.T, rec []byte) (string, bool) {
	t.Helper()
	var v map[string]json.RawMessage
	if err := json.Unmarshal(bytes.TrimPrefix(rec, []byte{recordSeparator}), &v); err != nil {
		t.Fatalf("%q: %v", rec, err)
	}
	raw, ok := v["MESSAGE"]
	if !ok || string(raw) == "null" {
		return "", false
	}
	var s string
	if json.Unmarshal(raw, &s) == nil {
		return s, true
	}
	var nums []int
	if json.Unmarshal(raw, &nums) != nil || len(nums) == 0 {
		return "", false
	}
	b := make([]byte, len(nums))
	for i, n := range nums {
		if n < 0 || n > 255 {
			return "", false
		}
		b[i] = byte(n)
	}
	return string(b), true
}

var splicedTag = regexp.MustCompile(`^,"tag":"(crossing|weather|other)","confidence":[01]\.[0-9]{4}$`)

// checkJournalOut checks out against in record by record: a record with a
// text (per journalText) is the same bytes with the tag and confidence
// spliced in before its closing brace, and its text is the one the Tagger
// was given; any other record is unchanged.
func checkJournalOut(t *testing.T, in, out []byte, texts []string) {
	t.Helper()
	ins := bytes.SplitAfter(in, []byte("\n"))
	outs := bytes.SplitAfter(out, []byte("\n"))
	if len(ins) != len(outs) {
		t.Fatalf("%d records in, %d out", len(ins)-1, len(outs)-1)
	}
	k := 0
	for i := range len(ins) - 1 {
		a, b := ins[i], outs[i]
		want, ok := journalText(t, a)
		if !ok {
			if !bytes.Equal(a, b) {
				t.Errorf("record %d changed without a text: %q -> %q", i+1, a, b)
			}
			continue
		}
		at, added := bytes.LastIndex(b, []byte(`,"tag":"`)), len(b)-len(a)
		if at < 0 || added <= 0 || !bytes.Equal(b[:at], a[:at]) || !bytes.Equal(b[at+added:], a[at:]) ||
			!splicedTag.Match(b[at:at+added]) || !json.Valid(bytes.TrimPrefix(b, []byte{recordSeparator})) {
			t.Errorf("record %d not spliced in place:\n in %q\nout %q", i+1, a, b)
		}
		if k >= len(texts) || texts[k] != want {
			t.Errorf("record %d: tagger got %q, want %q", i+1, texts[min(k, len(texts)-1)], want)
		}
		k++
	}
	if k != len(texts) {
		t.Errorf("tagger scored %d texts, want %d", len(texts), k)
	}
}

// asSeq puts a record separator before each line, as journalctl -o json-seq
// does.
func asSeq(in []byte) []byte {
	var b bytes.Buffer
	for _, l := range bytes.SplitAfter(in, []byte("\n")) {
		if len(l) > 0 {
			b.WriteByte(recordSeparator)
			b.Write(l)
		}
	}
	return b.Bytes()
}

func TestJournalGolden(t *testing.T) {
	in, err := os.ReadFile("testdata/journal.in")
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name   string
		in     []byte
		format InputFormat
	}{
		{"json", in, InputAuto},
		{"seq", asSeq(in), InputAuto},
		{"seq_jsonl", asSeq(in), InputJSONL},
	} {
		t.Run(c.name, func(t *testing.T) {
			rt := &recordingTagger{keywordTagger: newKeywordTagger()}
			out, st, errs := runString(t, Options{Tagger: rt, TextKeys: []string{"MESSAGE"}, Format: c.format, Jobs: 1}, string(c.in))
			var problems bytes.Buffer
			for _, e := range errs {
				fmt.Fprintln(&problems, e)
			}
			golden(t, "journal_"+c.name+".golden", []byte(out+"--- problems\n"+problems.String()))
			checkJournalOut(t, c.in, []byte(out), rt.texts)
			// Of the ten records: six have a text (string or bytes), one has
			// null, one none, and two hold arrays that are not bytes (a
			// field with two values; a number over 255).
			if st.Records != 10 || st.Written != 10 || st.NotString != 2 || st.NoText != 2 || st.Malformed != 0 || st.InvalidUTF8 != 2 {
				t.Errorf("stats %+v", st)
			}
		})
	}
}

// appendByteArray against encoding/json's reading of the same arrays.
func TestAppendByteArray(t *testing.T) {
	for _, c := range []string{
		`[0]`, `[255]`, `[ 1 , 2 ,3 ]`, "[\t10,\n13]", `[]`, `[256]`, `[1000]`, `[-1]`, `[1.0]`, `[1e2]`,
		`[1,"a"]`, `["a"]`, `[null]`, `[[1]]`, `[{"a":1}]`, `[true]`, `[0,0,0]`,
	} {
		got, ok := appendByteArray([]byte("x"), []byte(c), 0)
		var nums []any
		if err := json.Unmarshal([]byte(c), &nums); err != nil {
			t.Fatalf("%s: %v", c, err)
		}
		want, wantOK := []byte("x"), len(nums) > 0
		for _, n := range nums {
			f, isNum := n.(float64)
			// An integer 0..255 written without fraction or exponent, as
			// journalctl writes them.
			if !isNum || f != float64(int(f)) || f < 0 || f > 255 || strings.ContainsAny(c, ".eE") {
				wantOK = false
				break
			}
			want = append(want, byte(f))
		}
		if !wantOK {
			want = []byte("x")
		}
		if ok != wantOK || !bytes.Equal(got, want) {
			t.Errorf("%s: %q, %v; want %q, %v", c, got, ok, want, wantOK)
		}
	}
}

// toolPath finds a program on PATH or in the directories given. Under
// CI=true a missing one fails the test; elsewhere it skips.
func toolPath(t *testing.T, name string, dirs ...string) string {
	t.Helper()
	if p, err := exec.LookPath(name); err == nil {
		return p
	}
	for _, d := range dirs {
		p := filepath.Join(d, name)
		if st, err := os.Stat(p); err == nil && st.Mode()&0o111 != 0 {
			return p
		}
	}
	if os.Getenv("CI") == "true" {
		t.Fatalf("%s is needed (Debian's systemd and systemd-journal-remote)", name)
	}
	t.Skipf("%s not installed", name)
	return ""
}

// exportEntry appends one entry in the journal export format (the same
// systemd document, "Journal Export Format"): NAME=value lines, except a
// value with a newline or control character or invalid UTF-8, which is
// written as NAME, newline, its length as a 64-bit little-endian number, the
// bytes and a newline; an empty line ends the entry.
func exportEntry(dst []byte, fields [][2]string) []byte {
	for _, f := range fields {
		plain := utf8.ValidString(f[1]) && !strings.ContainsFunc(f[1], func(r rune) bool { return r < ' ' && r != '\t' })
		if plain {
			dst = append(dst, f[0]+"="+f[1]+"\n"...)
			continue
		}
		dst = append(dst, f[0]+"\n"...)
		dst = binary.LittleEndian.AppendUint64(dst, uint64(len(f[1])))
		dst = append(dst, f[1]+"\n"...)
	}
	return append(dst, '\n')
}

// The real journalctl's output: invented entries written in the export
// format, stored in a journal file by systemd-journal-remote, read back with
// journalctl -o json and -o json-seq, and tagged with -k MESSAGE. Every
// record must come out in order, spliced in place, and the text the Tagger
// saw must be the MESSAGE as encoding/json decodes it (string, or the bytes
// of the number array).
func TestJournalctlOutput(t *testing.T) {
	journalctl := toolPath(t, "journalctl")
	remote := toolPath(t, "systemd-journal-remote", "/lib/systemd", "/usr/lib/systemd")
	dir := t.TempDir()
	words := []string{"ferry", "fog", "Skerrow", "ticket", "swell", "gangway", "Holm", "rain", "deck", "crossing"}
	var export []byte
	const n = 300
	for i := range n {
		msg := fmt.Sprintf("%s %s at pier %d", words[i%len(words)], words[(i*3+1)%len(words)], i)
		switch {
		case i%7 == 3:
			msg += " caf\xe9" // Latin-1: not UTF-8
		case i%11 == 5:
			msg += " horn \a"
		case i%13 == 8:
			msg += "\nsecond line: wind from the west"
		}
		export = exportEntry(export, [][2]string{
			{"__REALTIME_TIMESTAMP", fmt.Sprint(1767225600000000 + i*1000)},
			{"__MONOTONIC_TIMESTAMP", fmt.Sprint(1000 + i)},
			{"_BOOT_ID", "0a1b2c3d4e5f60718293a4b5c6d7e8f9"},
			{"_HOSTNAME", "skerrow-quay"},
			{"_SYSTEMD_UNIT", "ferry-gate.service"},
			{"PRIORITY", fmt.Sprint(i % 8)},
			{"SYSLOG_IDENTIFIER", "ferry-gate"},
			{"MESSAGE", msg},
		})
	}
	file := filepath.Join(dir, "ferry.journal")
	imp := exec.Command(remote, "-o", file, "-")
	imp.Stdin = bytes.NewReader(export)
	if out, err := imp.CombinedOutput(); err != nil {
		t.Fatalf("systemd-journal-remote: %v\n%s", err, out)
	}
	for _, mode := range []string{"json", "json-seq"} {
		t.Run(mode, func(t *testing.T) {
			in, err := exec.Command(journalctl, "--file", file, "-o", mode, "-q").Output()
			if err != nil {
				t.Fatalf("journalctl -o %s: %v", mode, err)
			}
			if got := bytes.Count(in, []byte("\n")); got != n {
				t.Fatalf("journalctl wrote %d records, want %d", got, n)
			}
			if bin := bytes.Count(in, []byte(`"MESSAGE":[`)); bin < n/7 {
				t.Fatalf("only %d MESSAGE byte arrays in journalctl's output", bin)
			}
			for _, jobs := range []int{1, 3} {
				rt := &recordingTagger{keywordTagger: newKeywordTagger()}
				out, st, errs := runString(t, Options{Tagger: rt, TextKeys: []string{"MESSAGE"}, Jobs: jobs}, string(in))
				if len(errs) > 0 || st.Written != n || st.Passed != 0 {
					t.Fatalf("-j %d: stats %+v, problems %v", jobs, st, errs)
				}
				if jobs == 1 {
					checkJournalOut(t, in, []byte(out), rt.texts)
				} else if want, _, _ := runString(t, Options{TextKeys: []string{"MESSAGE"}, Jobs: 1}, string(in)); out != want {
					t.Errorf("-j %d differs from -j 1", jobs)
				}
			}
		})
	}
}
