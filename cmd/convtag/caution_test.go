package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"convtag/model/metrics"
)

// TestBuiltinCautions: the README, tag --help and inspect of the built-in
// model each say that it is a demonstration, not fit for decisions about
// people, and the README has its "Before you act on a tag" section before
// the worked example.
func TestBuiltinCautions(t *testing.T) {
	const phrase = "not fit for moderation or any decision about a person"
	_, help, _ := runCmd(t, "", "tag", "--help")
	_, inspect, _ := runCmd(t, "", "inspect")
	_, inspectFile, _ := runCmd(t, "", "inspect", "../../testdata/fixture.safetensors")
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	readme := strings.Join(strings.Fields(string(b)), " ")
	for name, text := range map[string]string{"tag --help": help, "inspect": inspect, "README": readme} {
		if !strings.Contains(strings.Join(strings.Fields(text), " "), phrase) && !strings.Contains(strings.Join(strings.Fields(text), " "), strings.Replace(phrase, "any", "for any", 1)) {
			t.Errorf("%s does not say the built-in model is %q", name, phrase)
		}
	}
	if !strings.HasPrefix(inspect, "caution:") {
		t.Errorf("inspect of the built-in model does not start with its caution:\n%s", inspect)
	}
	if strings.Contains(inspectFile, "caution:") {
		t.Errorf("inspect of a trained model carries the built-in model's caution")
	}
	i, j := strings.Index(readme, "## Before you act on a tag"), strings.Index(readme, "## A worked example")
	if i < 0 || j < 0 || i > j {
		t.Errorf("README: \"Before you act on a tag\" at %d, worked example at %d", i, j)
	}
	for _, must := range []string{"human review", "appealed", "local law", "drifts"} {
		if !strings.Contains(readme[max(i, 0):max(j, 0)], must) {
			t.Errorf("README's caution section does not mention %q", must)
		}
	}
}

// TestStatsCountsRecordsForReview: --stats says how many records fell
// below --min-confidence (those a person should look at), which must equal
// the records the output tags unsure with a confidence above 0 (a text
// with no words is unsure at confidence 0, and is counted apart).
func TestStatsCountsRecordsForReview(t *testing.T) {
	in, err := os.ReadFile("../../testdata/demo/chat.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	input := string(in) + "{\"text\":\"!!!\"}\n"
	code, out, errs := runCmd(t, input, "tag", "-m", fixture(t), "--min-confidence", "0.9", "--stats", "-j", "1")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	want := 0
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		if strings.Contains(line, `"tag":"unsure"`) && !strings.Contains(line, `"confidence":0.0000`) {
			want++
		}
	}
	if want == 0 {
		t.Fatal("no record below 0.9: the check would be empty")
	}
	if line := "convtag: for review (below 0.9) " + strconv.Itoa(want) + "\n"; !strings.Contains(errs, line) {
		t.Errorf("stats lack %q:\n%s", line, errs)
	}
	if !strings.Contains(errs, "convtag: no words         1\n") {
		t.Errorf("stats do not count the text with no words:\n%s", errs)
	}
}

// TestEvalCautions: each caution fires on its own condition and not
// otherwise. The figures are built from confusion matrices, through the
// same metrics code eval uses.
func TestEvalCautions(t *testing.T) {
	report := func(conf [][]int) *metrics.Report {
		r := &metrics.Report{Labels: []string{"a", "b"}, Confusion: conf}
		r.PerLabel = metrics.PerLabel(conf, r.Labels)
		return r
	}
	for _, c := range []struct {
		name string
		conf [][]int
		want []string
	}{
		{"many records, even recall", [][]int{{950, 50}, {50, 950}}, nil},
		{"few records", [][]int{{950, 50}, {2, 20}}, []string{"fewer than 30 records of b (22)"}},
		{"uneven recall", [][]int{{990, 10}, {400, 600}}, []string{"recall ranges from 0.600 (b) to 0.990 (a)"}},
		{"uncertain precision", [][]int{{5, 0}, {5, 995}}, []string{"fewer than 30 records of a (5)", "for a [0.24,0.76]"}},
	} {
		got := strings.Join(cautions(report(c.conf)), "\n")
		for _, w := range c.want {
			if !strings.Contains(got, w) {
				t.Errorf("%s: cautions %q lack %q", c.name, got, w)
			}
		}
		if len(c.want) == 0 && got != "" {
			t.Errorf("%s: cautions %q, want none", c.name, got)
		}
	}
}

// TestEvalSaysWhenRecordsWereSeen: eval counts the records that were the
// model's training or dev records (by a hash of their tokens, so case and
// spacing do not hide one) and says the figures are then optimistic; on
// records training never saw it says nothing.
func TestEvalSaysWhenRecordsWereSeen(t *testing.T) {
	dir := t.TempDir()
	m := filepath.Join(dir, "m.safetensors")
	train := "../../testdata/demo/train.jsonl"
	if code, _, errs := runCmd(t, "", "train", "-q", "-o", m, "--vector-size", "8", "--filters", "4", "--unseen-rows", "10",
		"--epochs", "1", "-j", "1", "--dev", demoDev, train); code != exitOK {
		t.Fatalf("train: exit %d: %s", code, errs)
	}
	for _, c := range []struct {
		file, want string
	}{
		{demoDev, "0 of these 129 records were among " + m + "'s training records and 129 among its dev records"},
		{train, "512 of these 512 records were among"},
	} {
		_, _, errs := runCmd(t, "", "eval", "-m", m, c.file)
		if !strings.Contains(errs, "convtag: caution: "+c.want) {
			t.Errorf("eval %s: stderr %q lacks %q", c.file, errs, c.want)
		}
	}
	// The dev records respelled: other case and spacing, same tokens.
	b, _ := os.ReadFile(demoDev)
	var respelled strings.Builder
	for _, line := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		var r map[string]any
		if err := json.Unmarshal([]byte(line), &r); err != nil {
			t.Fatal(err)
		}
		r["text"] = "  " + strings.ToUpper(r["text"].(string)) + " "
		out, _ := json.Marshal(r)
		respelled.Write(append(out, '\n'))
	}
	respelledFile := filepath.Join(dir, "respelled.jsonl")
	os.WriteFile(respelledFile, []byte(respelled.String()), 0o644)
	if _, _, errs := runCmd(t, "", "eval", "-m", m, respelledFile); !strings.Contains(errs, "and 129 among its dev records") {
		t.Errorf("eval on respelled dev records: %s", errs)
	}
	fresh := filepath.Join(dir, "fresh.jsonl")
	os.WriteFile(fresh, []byte(`{"text":"the quay lamps flicker at dusk over the third slipway","label":"praise"}`+"\n"+`{"text":"which gangway takes bicycles on the late sailing","label":"schedule"}`+"\n"), 0o644)
	if _, _, errs := runCmd(t, "", "eval", "-m", m, fresh); strings.Contains(errs, "caution: ") && strings.Contains(errs, "were among") {
		t.Errorf("eval on fresh records: %s", errs)
	}
}
