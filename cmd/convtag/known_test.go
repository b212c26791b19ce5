package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"convtag/model/token"
)

// TestKnownShare: --known-key gives each record the share of its tokens
// that occur in the training records (with --min-seen 1, the vocabulary is
// exactly the training records' tokens: the check recounts them from the
// training file with the tokenizer alone, not through the model's
// vocabulary); --stats sums them, shows the dev records' share stored at
// training, and warns on text the model has seen little of.
func TestKnownShare(t *testing.T) {
	dir := t.TempDir()
	m := filepath.Join(dir, "m.safetensors")
	trainFile := "../../testdata/demo/train.jsonl"
	if code, _, errs := runCmd(t, "", "train", "-q", "-o", m, "--vector-size", "8", "--filters", "4", "--unseen-rows", "20",
		"--epochs", "1", "-j", "1", "--dev", demoDev, trainFile); code != exitOK {
		t.Fatalf("train: exit %d: %s", code, errs)
	}
	tok := token.New(token.Settings{})
	var ts token.Tokens
	seen := map[string]bool{}
	readTexts(t, trainFile, func(text string) {
		tok.Tokenize(&ts, []byte(text))
		for i := range ts.Len() {
			seen[string(ts.At(i))] = true
		}
	})
	chat, err := os.ReadFile("../../testdata/demo/chat.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	code, out, errs := runCmd(t, string(chat), "tag", "-m", m, "--known-key", "seen", "--stats", "-j", "2")
	if code != exitOK {
		t.Fatalf("tag: exit %d: %s", code, errs)
	}
	words, known := 0, 0
	for i, line := range strings.Split(strings.TrimSpace(out), "\n") {
		var r struct {
			Text string
			Seen *float64
		}
		if err := json.Unmarshal([]byte(line), &r); err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		tok.Tokenize(&ts, []byte(r.Text))
		n, k := ts.Len(), 0
		for j := range n {
			if seen[string(ts.At(j))] {
				k++
			}
		}
		words, known = words+n, known+k
		switch {
		case n == 0 && r.Seen != nil:
			t.Errorf("line %d: no words but seen %v", i+1, *r.Seen)
		case n > 0 && (r.Seen == nil || fmt.Sprintf("%.4f", *r.Seen) != fmt.Sprintf("%.4f", float64(k)/float64(n))):
			t.Errorf("line %d %q: seen %v, want %d/%d", i+1, r.Text, r.Seen, k, n)
		}
	}
	if want := fmt.Sprintf("convtag: known words      %.1f%% of %d\n", 100*float64(known)/float64(words), words); !strings.Contains(errs, want) {
		t.Errorf("stats lack %q:\n%s", want, errs)
	}
	if !strings.Contains(errs, "convtag:   in dev records ") || strings.Contains(errs, "warning") {
		t.Errorf("stats: want the dev share and no warning:\n%s", errs)
	}
	// Invented non-words: the model knows none of them.
	var foreign strings.Builder
	for i := range 100 {
		fmt.Fprintf(&foreign, "{\"text\":\"vrokt zalimbu quespa %d trindolf\"}\n", i)
	}
	_, _, errs = runCmd(t, foreign.String(), "tag", "-m", m, "--stats")
	if !strings.Contains(errs, "convtag: warning: the model knows") {
		t.Errorf("no warning for text unlike the training data:\n%s", errs)
	}
	for _, f := range []string{"text", "csv", "tsv"} {
		if code, _, errs := runCmd(t, "text\nhello\n", "tag", "-m", m, "--format", f, "--known-key", "k"); code != exitUsage {
			t.Errorf("--known-key with --format %s: exit %d, %s", f, code, errs)
		}
	}
}

// readTexts calls fn with the "text" of every JSON line of path.
func readTexts(t *testing.T, path string, fn func(string)) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r struct{ Text string }
		if json.Unmarshal(sc.Bytes(), &r) == nil {
			fn(r.Text)
		}
	}
}
