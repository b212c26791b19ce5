package main

import (
	"encoding/json"
	"strings"
	"testing"

	"convtag/model"
)

func TestInspectNGrams(t *testing.T) {
	fixture(t)
	args := []string{"inspect", evalModel, "--ngrams", "3", "--sample", "../../testdata/demo/chat.jsonl", "--text-key", "text"}
	code, out, errs := runCmd(t, "", append(args, "--json")...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r struct {
		Labels []string `json:"labels"`
		Sample struct {
			Texts   int                      `json:"texts"`
			Labels  map[string][]model.NGram `json:"labels"`
			Filters []model.FilterWindows    `json:"filters"`
		} `json:"sample"`
	}
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if r.Sample.Texts != 201 || len(r.Sample.Labels) != len(r.Labels) || len(r.Sample.Filters) != 36 {
		t.Fatalf("sample: %d texts, %d labels, %d filters", r.Sample.Texts, len(r.Sample.Labels), len(r.Sample.Filters))
	}
	for l, gs := range r.Sample.Labels {
		if len(gs) != 3 {
			t.Errorf("%s: %d n-grams, want 3", l, len(gs))
		}
		for _, g := range gs {
			if g.Text == "" || g.Count < 1 {
				t.Errorf("%s: %+v", l, g)
			}
		}
	}
	code, out, _ = runCmd(t, "", args...)
	if code != exitOK || !strings.Contains(out, "n-grams that most raise") || !strings.Contains(out, "width 5 filter 11") {
		t.Errorf("text output:\n%s", out)
	}
	// Plain lines as the sample, from standard input.
	code, out, errs = runCmd(t, "lost my blue umbrella on the ferry\nthank you crew\n", "inspect", evalModel, "--ngrams", "2", "--sample", "-")
	if code != exitOK || !strings.Contains(out, "sample: 2 texts") {
		t.Errorf("stdin sample: exit %d, %s\n%s", code, errs, out)
	}
	for _, bad := range [][]string{
		{"inspect", evalModel, "--ngrams", "3"},
		{"inspect", evalModel, "--sample", "x.txt"},
		{"inspect", evalModel, "--ngrams", "-1", "--sample", "x.txt"},
	} {
		if code, _, errs := runCmd(t, "", bad...); code != exitUsage || !strings.Contains(errs, "try: ") {
			t.Errorf("%v: exit %d, %q", bad, code, errs)
		}
	}
}
