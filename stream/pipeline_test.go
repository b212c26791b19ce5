package stream

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"strings"
	"testing"
	"time"
)

func TestOutputFormatsGolden(t *testing.T) {
	in, err := os.ReadFile("testdata/records.in")
	if err != nil {
		t.Fatal(err)
	}
	nIn := int64(bytes.Count(in, []byte("\n")))
	for _, c := range []struct {
		name string
		opts Options
	}{
		{"default", Options{}},
		{"emit_jsonl", Options{Emit: EmitJSONL}},
		{"scores_top", Options{Scores: true, Top: 2}},
		{"keys", Options{TagKey: "label", ConfidenceKey: "p", TextKeys: []string{"text", "msg.body"}}},
		{"min_confidence", Options{MinConfidence: 0.7, UnsureTag: "maybe"}},
		{"keep", Options{Keep: []string{"weather"}}},
		{"drop", Options{Drop: []string{"other", "crossing"}}},
		{"format_text", Options{Format: InputText}},
		{"format_jsonl", Options{Format: InputJSONL}},
	} {
		t.Run(c.name, func(t *testing.T) {
			out, st, errs := runString(t, c.opts, string(in))
			var problems bytes.Buffer
			for _, e := range errs {
				fmt.Fprintln(&problems, e)
			}
			golden(t, "format_"+c.name+".golden", []byte(out+"--- problems\n"+problems.String()))
			lines := strings.Count(out, "\n")
			if st.Records != nIn || int64(lines) != st.Written || st.Written+st.Dropped != nIn {
				t.Errorf("%d lines in, stats %+v, %d lines out", nIn, st, lines)
			}
			for _, l := range strings.Split(strings.TrimSuffix(out, "\n"), "\n") {
				if strings.HasPrefix(l, "{") && strings.Contains(l, "\"tag\"") && !json.Valid([]byte(l)) {
					t.Errorf("invalid JSON out: %q", l)
				}
			}
		})
	}
}

// chatLog returns n invented records: JSON with and without text, text
// lines, blanks, CRLF, malformed JSON, so that every path takes part.
func chatLog(n int, seed uint64) string {
	rng := rand.New(rand.NewPCG(seed, 1))
	words := []string{"ferry", "harbour", "fog", "wind", "ticket", "Skerrow", "Pellory", "market",
		"deck", "storm", "gull", "lighthouse", "late", "noon", "swell", "crossing", "rain", "café", "\"quoted\""}
	var b strings.Builder
	for i := range n {
		var text strings.Builder
		for k := range 3 + rng.IntN(12) {
			if k > 0 {
				text.WriteByte(' ')
			}
			text.WriteString(words[rng.IntN(len(words))])
		}
		tx := text.String()
		q, _ := json.Marshal(tx)
		switch r := rng.IntN(20); {
		case r < 12:
			fmt.Fprintf(&b, `{"id":%d,"text":%s}`+"\n", i, q)
		case r < 15:
			b.WriteString(tx + "\n")
		case r == 15:
			b.WriteString("\n")
		case r == 16:
			fmt.Fprintf(&b, `{"id":%d, "text" : %s }`+"\r\n", i, q)
		case r == 17:
			fmt.Fprintf(&b, `{"id":%d,"text":%s`+"\n", i, q)
		case r == 18:
			fmt.Fprintf(&b, `{"id":%d,"msg":{"body":%s}}`+"\n", i, q)
		default:
			fmt.Fprintf(&b, `{"id":%d,"text":%d}`+"\n", i, i)
		}
	}
	return b.String()
}

// Output order equals input order with any number of workers, however long
// each block takes: -j 1 (the sequential path) is the reference.
func TestOrderAnyJobs(t *testing.T) {
	n := 6000
	if raceEnabled || testing.Short() {
		n = 2000
	}
	in := chatLog(n, 1)
	want, wantSt, _ := runString(t, Options{Jobs: 1}, in)
	if wantSt.Records != int64(n) || wantSt.Written != int64(n) {
		t.Fatalf("reference run lost records: %+v", wantSt)
	}
	for _, jobs := range []int{1, 2, 8} {
		for _, bs := range []int{64, 4096} {
			tg := newKeywordTagger()
			tg.delay = 2 * time.Millisecond
			got, st, _ := runString(t, Options{Jobs: jobs, BlockSize: bs, Tagger: tg}, in)
			if got != want {
				t.Errorf("-j %d, block %d: output differs from -j 1 (%d vs %d bytes)", jobs, bs, len(got), len(want))
			}
			if st.Records != wantSt.Records || st.Written != wantSt.Written || st.Rejected != wantSt.Rejected {
				t.Errorf("-j %d: stats %+v, want %+v", jobs, st, wantSt)
			}
		}
	}
}
