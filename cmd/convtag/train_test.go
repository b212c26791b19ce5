package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"convtag/model"
	"convtag/model/nb"
)

// small keeps the command tests fast; the recipe itself is checked in
// package model against PyTorch.
var small = []string{"--vector-size", "16", "--filters", "8", "--unseen-rows", "50", "--epochs", "3", "-q"}

func trainArgs(out string, extra ...string) []string {
	args := append([]string{"train", "-o", out}, small...)
	args = append(args, extra...)
	return append(args, "../../testdata/demo/train.jsonl", "--dev", "../../testdata/demo/dev.jsonl")
}

func TestTrainDemo(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "m.safetensors")
	code, stdout, stderr := runCmd(t, "", trainArgs(out, "-j", "2")...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !regexp.MustCompile(`dev accuracy: network 0\.\d{4} .*naive Bayes 0\.\d{4}`).MatchString(stdout) {
		t.Errorf("stdout lacks both accuracies: %q", stdout)
	}
	m, err := model.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	if m.Fold == nil {
		t.Error("no folded table written by default")
	}
	want := []string{"lost-and-found", "praise", "schedule", "spam", "tickets"}
	if strings.Join(m.Labels, ",") != strings.Join(want, ",") {
		t.Errorf("labels %q, want %q", m.Labels, want)
	}
	var sum trainSummary
	if err := json.Unmarshal([]byte(m.Meta[model.MetaTraining]), &sum); err != nil {
		t.Fatalf("training summary: %v", err)
	}
	if sum.EpochsRun != 3 || len(sum.Curve) != 3 || sum.Records["train"] == 0 || sum.Records["dev"] == 0 || len(sum.DataSHA256) != 64 {
		t.Errorf("training summary incomplete: %+v", sum)
	}
	if sum.Network.DevAccuracy != sum.Curve[sum.BestEpoch-1].DevAcc {
		t.Errorf("kept epoch %d's accuracy %.4f differs from the curve's", sum.BestEpoch, sum.Network.DevAccuracy)
	}
	if !sum.Baseline.Stored {
		t.Error("baseline not stored")
	} else if b, err := nb.Decode(m.Baseline); err != nil || b.Labels() != 5 {
		t.Errorf("stored baseline: %v", err)
	}
	// The network in the file is the one trained: its dev accuracy
	// recomputed through the tagging path matches the summary.
	p := m.NewPredictor()
	dev, _ := os.ReadFile("../../testdata/demo/dev.jsonl")
	right, n := 0, 0
	for _, line := range bytes.Split(bytes.TrimSpace(dev), []byte("\n")) {
		var r struct{ Text, Label string }
		json.Unmarshal(line, &r)
		probs := p.Predict([]byte(r.Text))
		best := 0
		for i, v := range probs {
			if v > probs[best] {
				best = i
			}
		}
		if m.Labels[best] == r.Label {
			right++
		}
		n++
	}
	if got := float64(right) / float64(n); got < sum.Network.DevAccuracy-0.02 || got > sum.Network.DevAccuracy+0.02 {
		t.Errorf("dev accuracy through Predict %.4f, summary says %.4f", got, sum.Network.DevAccuracy)
	}
}

// TestTrainReproducible: the same data, flags, seed and -j give a
// byte-identical model file.
func TestTrainReproducible(t *testing.T) {
	dir := t.TempDir()
	var files [][]byte
	for i := range 2 {
		out := filepath.Join(dir, "m"+string(rune('0'+i)))
		if code, _, stderr := runCmd(t, "", trainArgs(out, "-j", "2", "--seed", "7", "--fold-half")...); code != exitOK {
			t.Fatalf("exit %d: %s", code, stderr)
		}
		b, err := os.ReadFile(out)
		if err != nil {
			t.Fatal(err)
		}
		files = append(files, b)
	}
	if !bytes.Equal(files[0], files[1]) {
		t.Error("two runs with the same seed and -j wrote different files")
	}
}

func TestTrainInputProblems(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "m.safetensors")
	bad := filepath.Join(dir, "bad.jsonl")
	os.WriteFile(bad, []byte("{\"text\":\"no label\"}\nnot json\n"), 0o644)
	tsv := filepath.Join(dir, "x.tsv")
	os.WriteFile(tsv, []byte("a\tthe first boat\na\tthe second boat\nb\ta lost scarf\nb\ta lost hat\nc\tonly one\nno tab\n"), 0o644)
	for _, tc := range []struct {
		name string
		args []string
		code int
		errs []string
	}{
		{"no output", []string{"train", bad}, exitUsage, []string{"no output file", "try: "}},
		{"no inputs", []string{"train", "-o", out}, exitUsage, []string{"no input files"}},
		{"bad format", []string{"train", "-o", out, "--format", "yaml", bad}, exitUsage, []string{"--format"}},
		{"bad weights", []string{"train", "-o", out, "--class-weights", "heavy", bad}, exitUsage, []string{"class-weights"}},
		{"bad recipe before reading", []string{"train", "-o", out, "--learning-rate", "-1", filepath.Join(dir, "nope.jsonl")}, exitUsage, []string{"train: model: bad recipe: --learning-rate -1", "try: "}},
		{"no records", []string{"train", "-o", out, bad}, exitFailure, []string{bad + ":1:", bad + ":2:", "2 training records skipped", "no usable labelled records in " + bad}},
		{"missing file", []string{"train", "-o", out, filepath.Join(dir, "nope.jsonl")}, exitFailure, []string{"nope.jsonl"}},
		{"label-tab-text, rare label", append(append([]string{"train", "-o", out, "--format", "label-tab-text", "--class-weights", "balanced"}, small...), tsv), exitOK, []string{`label "c" has fewer than 2 records`, tsv + ":6:", "1 training records skipped"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := runCmd(t, "", tc.args...)
			if code != tc.code {
				t.Errorf("exit %d, want %d: %s", code, tc.code, stderr)
			}
			for _, s := range tc.errs {
				if !strings.Contains(stderr, s) {
					t.Errorf("stderr lacks %q: %s", s, stderr)
				}
			}
		})
	}
}

// TestTrainStoresLargeBaseline trains on invented records with a wide
// vocabulary, so that the baseline's encoding passes 4 MiB, and checks that
// it is stored and that eval scores it exactly like one refitted on the same
// training file.
func TestTrainStoresLargeBaseline(t *testing.T) {
	dir := t.TempDir()
	trainFile, devFile := filepath.Join(dir, "train.jsonl"), filepath.Join(dir, "dev.jsonl")
	word := func(x uint64) string { // base-26 spelling of x
		var b []byte
		for i := 0; i < 6; i++ {
			b = append(b, byte('a'+x%26))
			x /= 26
		}
		return string(b)
	}
	gen := func(path string, n int, seed uint64) {
		var buf bytes.Buffer
		x := seed
		next := func() uint64 { x = x*6364136223846793005 + 1442695040888963407; return x >> 33 }
		labels := []string{"ferry", "ticket", "weather"}
		for i := range n {
			l := i % 3
			ws := []string{labels[l] + "cue"}
			for range 14 {
				ws = append(ws, word(next()%60000))
			}
			fmt.Fprintf(&buf, "{\"text\":%q,\"label\":%q}\n", strings.Join(ws, " "), labels[l])
		}
		if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	gen(trainFile, 20000, 7)
	gen(devFile, 300, 99)
	out := filepath.Join(dir, "m.safetensors")
	code, _, stderr := runCmd(t, "", "train", "-o", out, "--vector-size", "4", "--filters", "2", "--unseen-rows", "10",
		"--epochs", "1", "--no-fold", "-q", trainFile, "--dev", devFile)
	if code != exitOK {
		t.Fatalf("train: exit %d: %s", code, stderr)
	}
	if !regexp.MustCompile(`baseline: naive Bayes, \d+\.\d MB stored`).MatchString(stderr) {
		t.Errorf("stderr lacks the baseline's size: %q", stderr)
	}
	m, err := model.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	size := len(m.Baseline)
	m.Close()
	if size <= 4<<20 {
		t.Fatalf("baseline is %d bytes; the test needs more than 4 MiB", size)
	}
	report := func(extra ...string) string {
		args := append([]string{"eval", "--json", "-m", out}, extra...)
		code, stdout, stderr := runCmd(t, "", append(args, devFile)...)
		if code != exitOK {
			t.Fatalf("eval %q: exit %d: %s", extra, code, stderr)
		}
		var o struct {
			Baseline map[string]any `json:"baseline"`
		}
		if err := json.Unmarshal([]byte(stdout), &o); err != nil || o.Baseline == nil {
			t.Fatalf("eval %q: no baseline in %q (%v)", extra, stdout, err)
		}
		delete(o.Baseline, "source")
		js, _ := json.Marshal(o.Baseline)
		return string(js)
	}
	stored, refit := report(), report("--baseline-train", trainFile)
	if stored != refit {
		t.Errorf("stored baseline scores\n%s\nrefitted baseline scores\n%s", stored, refit)
	}
}
