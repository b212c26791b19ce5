package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
)

// TestInspectModelCard: inspect starts with the model card: the trainer's
// own words first, then per-label dev figures that equal what eval reports
// for the same model on the same dev file (a separate code path: eval
// reloads the saved, folded model), the data and the recipe. The raw
// metadata only comes with --all; --json carries the card's fields. A
// train without card flags reminds the user once.
func TestInspectModelCard(t *testing.T) {
	dir := t.TempDir()
	m := filepath.Join(dir, "card.safetensors")
	code, _, errs := runCmd(t, "", "train", "-q", "-o", m, "--vector-size", "16", "--filters", "8", "--unseen-rows", "50", "--epochs", "3",
		"-j", "1", "--description", "Sorts the invented ferry help chat by topic.", "--intended-use", "routing lines to a desk",
		"--not-for", "judging the people who wrote them", "--dev", demoDev, "../../testdata/demo/train.jsonl")
	if code != exitOK {
		t.Fatalf("train: exit %d: %s", code, errs)
	}
	if strings.Contains(errs, "reminder") {
		t.Errorf("reminder printed although the card was given: %s", errs)
	}
	_, out, _ := runCmd(t, "", "inspect", m)
	for i, want := range []string{"model card\ndescription:    Sorts the invented ferry help chat by topic.\nintended use:   routing lines to a desk\nnot for:        judging the people who wrote them\n",
		"tags, on 129 dev records", "trained on:     train.jsonl (512 records); dev dev.jsonl", "recipe:         adadelta", "learning curve"} {
		j := strings.Index(out, want)
		if j < 0 || (i == 0 && j != 0) {
			t.Errorf("inspect lacks %q (at the start: %v):\n%s", want, i == 0, out)
		}
	}
	if strings.Contains(out, "meta ") || strings.Contains(out, "training curve:") {
		t.Errorf("raw fields shown without --all:\n%s", out)
	}
	if _, all, _ := runCmd(t, "", "inspect", "--all", m); !strings.Contains(all, "training curve:") {
		t.Errorf("--all lacks the raw training fields")
	}

	// The per-label figures equal eval's on the same dev file.
	_, ev, _ := runCmd(t, "", "eval", "--json", "--no-baseline", "-m", m, demoDev)
	var r struct {
		PerLabel []struct {
			Label             string
			Precision, Recall float64
			Support           int
		} `json:"per_label"`
	}
	if err := json.Unmarshal([]byte(ev), &r); err != nil {
		t.Fatal(err)
	}
	for _, l := range r.PerLabel {
		row := strings.Join([]string{l.Label, f3(l.Precision), f3(l.Recall)}, " ")
		found := false
		for _, line := range strings.Split(out, "\n") {
			if strings.Join(strings.Fields(line), " ") != "" && strings.HasPrefix(strings.Join(strings.Fields(line), " "), row) {
				found = true
			}
		}
		if !found {
			t.Errorf("card has no row %q (eval's figures):\n%s", row, out)
		}
	}
	_, js, _ := runCmd(t, "", "inspect", "--json", m)
	if !strings.Contains(js, `"intended_use": "routing lines to a desk"`) || !strings.Contains(js, `"dev_per_label"`) {
		t.Errorf("--json lacks the card's fields")
	}

	code, _, errs = runCmd(t, "", "train", "-q", "-o", filepath.Join(dir, "bare.safetensors"), "--vector-size", "8", "--filters", "4",
		"--unseen-rows", "10", "--epochs", "1", "-j", "1", "../../testdata/demo/train.jsonl")
	if code != exitOK || strings.Count(errs, "convtag: reminder: say what this model is for") != 1 {
		t.Errorf("train without a card: exit %d, stderr %q; want one reminder", code, errs)
	}
}
