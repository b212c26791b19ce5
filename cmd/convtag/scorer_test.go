package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"

	"convtag/model"
)

// TestTagScorer trains with --mix-baseline on the demo data, then checks
// that tag honours the stored scorer and --scorer, that the baseline's
// tags are the linear model's own, and that --scorer on a file without a
// baseline is a usage error.
func TestTagScorer(t *testing.T) {
	dir := t.TempDir()
	mixed := filepath.Join(dir, "mix.safetensors")
	plain := filepath.Join(dir, "plain.safetensors")
	for _, c := range [][]string{
		{"train", "-q", "-o", mixed, "-j", "1", "--epochs", "3", "--mix-baseline", "--dev", "../../testdata/demo/dev.jsonl", "../../testdata/demo/train.jsonl"},
		{"train", "-q", "-o", plain, "-j", "1", "--epochs", "3", "--dev", "../../testdata/demo/dev.jsonl", "../../testdata/demo/train.jsonl"},
	} {
		if code, _, errs := runCmd(t, "", c...); code != exitOK {
			t.Fatalf("%v: exit %d: %s", c, code, errs)
		}
	}
	m, err := model.Open(mixed)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	if m.Linear == nil {
		t.Fatal("--mix-baseline stored no linear baseline")
	}
	lines := []string{`{"text":"the ferry was late again and nobody said why"}`, `{"text":"where do I buy a return ticket"}`, `{"text":"found a blue umbrella on the upper deck"}`}
	in := strings.Join(lines, "\n") + "\n"
	scores := func(args ...string) []map[string]float64 {
		t.Helper()
		code, out, errs := runCmd(t, in, append([]string{"tag", "--scores"}, args...)...)
		if code != exitOK {
			t.Fatalf("tag %v: exit %d: %s", args, code, errs)
		}
		var got []map[string]float64
		for _, l := range strings.Split(strings.TrimSpace(out), "\n") {
			var r struct{ Scores map[string]float64 }
			if err := json.Unmarshal([]byte(l), &r); err != nil {
				t.Fatal(err)
			}
			got = append(got, r.Scores)
		}
		return got
	}
	net := scores("-m", mixed, "--scorer", "network")
	base := scores("-m", mixed, "--scorer", "baseline")
	comb := scores("-m", mixed, "--scorer", "combined")
	stored := scores("-m", mixed)
	p := m.NewPredictor()
	for i, l := range lines {
		var r struct{ Text string }
		json.Unmarshal([]byte(l), &r)
		p.SetScorer(model.Scorer{})
		pn := append([]float32(nil), p.Predict([]byte(r.Text))...)
		p.SetScorer(model.Scorer{Kind: model.ScoreBaseline})
		pb := p.Predict([]byte(r.Text))
		for c, lab := range m.Labels {
			if d := net[i][lab] - float64(pn[c]); d > 1e-4 || d < -1e-4 {
				t.Errorf("record %d %s: --scorer network %v, network %v", i, lab, net[i][lab], pn[c])
			}
			if d := base[i][lab] - float64(pb[c]); d > 1e-4 || d < -1e-4 {
				t.Errorf("record %d %s: --scorer baseline %v, baseline %v", i, lab, base[i][lab], pb[c])
			}
		}
		want := net
		switch m.Scorer.Kind {
		case model.ScoreBaseline:
			want = base
		case model.ScoreCombined:
			want = comb
		}
		for _, lab := range m.Labels {
			if stored[i][lab] != want[i][lab] {
				t.Errorf("record %d: stored scorer %s gives %v, --scorer gives %v", i, m.Scorer, stored[i], want[i])
				break
			}
		}
	}
	if code, _, errs := runCmd(t, in, "tag", "-m", plain, "--scorer", "combined"); code != exitUsage || !strings.Contains(errs, "linear baseline") {
		t.Errorf("--scorer combined without a baseline: exit %d, %s", code, errs)
	}
	if code, _, errs := runCmd(t, in, "tag", "--scorer", "baseline"); code != exitUsage || !strings.Contains(errs, "linear baseline") {
		t.Errorf("--scorer baseline on the built-in model: exit %d, %s", code, errs)
	}
	if code, _, errs := runCmd(t, in, "tag", "-m", mixed, "--scorer", "forest"); code != exitUsage || !strings.Contains(errs, "unknown scorer") {
		t.Errorf("--scorer forest: exit %d, %s", code, errs)
	}
}
