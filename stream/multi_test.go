package stream

import (
	"strconv"
	"strings"
	"testing"
)

// numberTagger is a MultiTagger for tests whose probabilities are written
// in the text: its first three words are the probabilities of pier, tide
// and gull (missing ones are 0), so every expected output is plain to see.
type numberTagger struct{ th []float64 }

func (numberTagger) Labels() []string        { return []string{"pier", "tide", "gull"} }
func (t numberTagger) Thresholds() []float64 { return t.th }
func (numberTagger) NewScorer() Scorer       { return &numberScorer{p: make([]float32, 3)} }

type numberScorer struct{ p []float32 }

func (s *numberScorer) Score(text []byte) []float32 {
	clear(s.p)
	for i, f := range strings.Fields(string(text)) {
		if i >= 3 {
			break
		}
		v, _ := strconv.ParseFloat(f, 64)
		s.p[i] = float32(v)
	}
	return s.p
}

func TestMultiTagger(t *testing.T) {
	tg := numberTagger{th: []float64{0.5, 0.3, 0.8}}
	in := `{"text":"0.9 0.4 0.1"}
{"text":"0.2 0.1 0.85","id":2}
{"text":"0.1 0.1 0.1"}
{"text":"0.6 0.7 0.9"}
`
	for _, tc := range []struct {
		name string
		o    Options
		want string
	}{
		{"stored thresholds", Options{}, `{"text":"0.9 0.4 0.1","tags":["pier","tide"],"confidence":{"pier":0.9000,"tide":0.4000}}
{"text":"0.2 0.1 0.85","id":2,"tags":["gull"],"confidence":{"gull":0.8500}}
{"text":"0.1 0.1 0.1","tags":[],"confidence":{}}
{"text":"0.6 0.7 0.9","tags":["gull","tide","pier"],"confidence":{"gull":0.9000,"tide":0.7000,"pier":0.6000}}
`},
		{"per-label override and key", Options{MinConfidenceFor: map[string]float64{"tide": 0.5}, TagsKey: "labels"}, `{"text":"0.9 0.4 0.1","labels":["pier"],"confidence":{"pier":0.9000}}
{"text":"0.2 0.1 0.85","id":2,"labels":["gull"],"confidence":{"gull":0.8500}}
{"text":"0.1 0.1 0.1","labels":[],"confidence":{}}
{"text":"0.6 0.7 0.9","labels":["gull","tide","pier"],"confidence":{"gull":0.9000,"tide":0.7000,"pier":0.6000}}
`},
		{"bare minimum for all", Options{MinConfidence: 0.65}, `{"text":"0.9 0.4 0.1","tags":["pier"],"confidence":{"pier":0.9000}}
{"text":"0.2 0.1 0.85","id":2,"tags":["gull"],"confidence":{"gull":0.8500}}
{"text":"0.1 0.1 0.1","tags":[],"confidence":{}}
{"text":"0.6 0.7 0.9","tags":["gull","tide"],"confidence":{"gull":0.9000,"tide":0.7000}}
`},
		{"keep any listed", Options{Keep: []string{"tide"}}, `{"text":"0.9 0.4 0.1","tags":["pier","tide"],"confidence":{"pier":0.9000,"tide":0.4000}}
{"text":"0.6 0.7 0.9","tags":["gull","tide","pier"],"confidence":{"gull":0.9000,"tide":0.7000,"pier":0.6000}}
`},
		{"drop any listed", Options{Drop: []string{"pier"}}, `{"text":"0.2 0.1 0.85","id":2,"tags":["gull"],"confidence":{"gull":0.8500}}
{"text":"0.1 0.1 0.1","tags":[],"confidence":{}}
`},
		{"keep untagged as unsure", Options{Keep: []string{"unsure"}}, `{"text":"0.1 0.1 0.1","tags":[],"confidence":{}}
`},
		{"scores", Options{Scores: true}, `{"text":"0.9 0.4 0.1","tags":["pier","tide"],"confidence":{"pier":0.9000,"tide":0.4000},"scores":{"pier":0.9000,"tide":0.4000,"gull":0.1000}}
{"text":"0.2 0.1 0.85","id":2,"tags":["gull"],"confidence":{"gull":0.8500},"scores":{"pier":0.2000,"tide":0.1000,"gull":0.8500}}
{"text":"0.1 0.1 0.1","tags":[],"confidence":{},"scores":{"pier":0.1000,"tide":0.1000,"gull":0.1000}}
{"text":"0.6 0.7 0.9","tags":["gull","tide","pier"],"confidence":{"gull":0.9000,"tide":0.7000,"pier":0.6000},"scores":{"pier":0.6000,"tide":0.7000,"gull":0.9000}}
`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for _, jobs := range []int{1, 3} {
				o := tc.o
				o.Tagger, o.Jobs, o.Format = tg, jobs, InputJSONL
				got, st, errs := runString(t, o, in)
				if len(errs) > 0 {
					t.Fatal(errs)
				}
				if got != tc.want {
					t.Errorf("-j %d:\n got %s\nwant %s", jobs, got, tc.want)
				}
				if tc.o.Keep == nil && tc.o.Drop == nil && tc.o.MinConfidence == 0 && tc.o.MinConfidenceFor == nil &&
					(st.Tags["pier"] != 2 || st.Tags["tide"] != 2 || st.Tags["gull"] != 2 || st.Tags["unsure"] != 1) {
					t.Errorf("tag counts %v", st.Tags)
				}
			}
		})
	}
}

// TestMultiTaggerText: text lines as TSV and CSV records get the tags and
// their probabilities joined with commas, an empty field for none.
func TestMultiTaggerText(t *testing.T) {
	tg := numberTagger{th: []float64{0.5, 0.3, 0.8}}
	got, _, errs := runString(t, Options{Tagger: tg, Format: InputText, Jobs: 1}, "0.9 0.4 0.1 ferry\n0.1 0.1 0.1 calm\n")
	if len(errs) > 0 {
		t.Fatal(errs)
	}
	if want := "pier,tide\t0.9000,0.4000\t0.9 0.4 0.1 ferry\n\t\t0.1 0.1 0.1 calm\n"; got != want {
		t.Errorf("text:\n got %q\nwant %q", got, want)
	}
	got, _, errs = runString(t, Options{Tagger: tg, Format: InputCSV, Jobs: 1}, "id,text\n1,0.9 0.4 0.9\n2,0.1 0.1 0.1\n")
	if len(errs) > 0 {
		t.Fatal(errs)
	}
	if want := "id,text,tags,confidence\n1,0.9 0.4 0.9,\"pier,gull,tide\",\"0.9000,0.9000,0.4000\"\n2,0.1 0.1 0.1,,\n"; got != want {
		t.Errorf("csv:\n got %q\nwant %q", got, want)
	}
	got, _, _ = runString(t, Options{Tagger: tg, Format: InputText, Emit: EmitJSONL, Jobs: 1}, "0.1 0.9 0.1 x\n")
	if want := `{"text":"0.1 0.9 0.1 x","tags":["tide"],"confidence":{"tide":0.9000}}` + "\n"; got != want {
		t.Errorf("text as JSON:\n got %q\nwant %q", got, want)
	}
}

// TestMultiKeys: a MultiTagger with no thresholds is single-label; the
// tags key may not be another added key.
func TestMultiKeys(t *testing.T) {
	for i, tg := range []Tagger{numberTagger{}, numberTagger{th: []float64{0.5, 0.5, 0.5}}} {
		got, _, errs := runString(t, Options{Tagger: tg, Format: InputJSONL, Jobs: 1}, `{"text":"0.9 0.6 0.1"}`+"\n")
		if len(errs) > 0 {
			t.Fatal(errs)
		}
		want := `{"text":"0.9 0.6 0.1","tag":"pier","confidence":0.9000}` + "\n"
		if i == 1 {
			want = `{"text":"0.9 0.6 0.1","tags":["pier","tide"],"confidence":{"pier":0.9000,"tide":0.6000}}` + "\n"
		}
		if got != want {
			t.Errorf("got %s want %s", got, want)
		}
	}
	if _, err := newConfig(Options{Tagger: numberTagger{}, TagsKey: "confidence"}); err == nil {
		t.Error("tags key equal to the confidence key accepted")
	}
}
