package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestParseMinConfidence(t *testing.T) {
	for _, c := range []struct {
		in     string
		all    float64
		per    map[string]float64
		errHas string
	}{
		{"", 0, nil, ""},
		{"0.7", 0.7, nil, ""},
		{"spam=0.9,tickets=0.7,0.6", 0.6, map[string]float64{"spam": 0.9, "tickets": 0.7}, ""},
		{" spam = 0.9 , 0.5 ", 0.5, map[string]float64{"spam": 0.9}, ""},
		{"spam=", 0, nil, `"spam="`},
		{"=0.5", 0, nil, "no label"},
		{"0.5,0.6", 0, nil, "more than one value without a label"},
		{"spam=0.9,spam=0.8", 0, nil, "given twice"},
		{"spam=NaN", 0, nil, "want a probability"},
		{"spam=1.5", 0, nil, "want a probability"},
	} {
		r, err := parseMinConfidence(c.in)
		if c.errHas != "" {
			if err == nil || !strings.Contains(err.Error(), c.errHas) {
				t.Errorf("%q: error %v, want one with %q", c.in, err, c.errHas)
			}
			continue
		}
		if err != nil || r.all != c.all || len(r.perLabel) != len(c.per) {
			t.Errorf("%q: %+v, %v", c.in, r, err)
		}
		for l, v := range c.per {
			if r.perLabel[l] != v {
				t.Errorf("%q: %s = %v, want %v", c.in, l, r.perLabel[l], v)
			}
		}
	}
}

// TestPerLabelThresholds: each record's tag follows from its own scores
// and the threshold of its best label (computed here from --scores, not by
// the pipeline's code), with thresholds given on the command line and read
// from eval's JSON (labels whose target was not reached: always unsure).
func TestPerLabelThresholds(t *testing.T) {
	m := fixture(t)
	chat, err := os.ReadFile("../../testdata/demo/chat.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	check := func(name string, args []string, thr func(label string) float64) {
		t.Helper()
		code, out, errs := runCmd(t, string(chat), append([]string{"tag", "-m", m, "--scores", "-j", "2"}, args...)...)
		if code != exitOK {
			t.Fatalf("%s: exit %d: %s", name, code, errs)
		}
		unsure := 0
		for i, line := range strings.Split(strings.TrimSpace(out), "\n") {
			var r struct {
				Tag    string
				Scores map[string]float64
			}
			if err := json.Unmarshal([]byte(line), &r); err != nil {
				t.Fatalf("%s line %d: %v", name, i+1, err)
			}
			best, bp := "", -1.0
			for l, p := range r.Scores {
				if p > bp || p == bp && l < best {
					best, bp = l, p
				}
			}
			want := best
			if bp < thr(best) {
				want = "unsure"
			}
			// Scores are rounded to 4 decimals: a probability within
			// rounding of its threshold may fall either way.
			if r.Tag != want && abs(bp-thr(best)) > 1e-4 {
				t.Errorf("%s line %d: tag %q, want %q (best %s %.4f, threshold %v)", name, i+1, r.Tag, want, best, bp, thr(best))
			}
			if r.Tag == "unsure" {
				unsure++
			}
		}
		if unsure == 0 {
			t.Errorf("%s: no record unsure: the check is empty", name)
		}
	}
	check("flag", []string{"--min-confidence", "spam=0.99,tickets=0.95,0.4"}, func(l string) float64 {
		switch l {
		case "spam":
			return 0.99
		case "tickets":
			return 0.95
		}
		return 0.4
	})

	file := filepath.Join(t.TempDir(), "thresholds.json")
	code, out, errs := runCmd(t, "", "eval", "--json", "-m", m, "--target-precision", "0.9", demoDev)
	if code != exitOK {
		t.Fatalf("eval: exit %d: %s", code, errs)
	}
	os.WriteFile(file, []byte(out), 0o644)
	var e evalThresholds
	if err := json.Unmarshal([]byte(out), &e); err != nil || e.Target == nil {
		t.Fatalf("eval JSON: %v", err)
	}
	fromFile := map[string]float64{}
	for _, l := range e.Target.PerLabel {
		fromFile[l.Label] = 2
		if l.Reached {
			fromFile[l.Label] = *l.Threshold
		}
	}
	check("file", []string{"--thresholds", file}, func(l string) float64 { return fromFile[l] })
	check("file and flag", []string{"--thresholds", file, "--min-confidence", "praise=0.1"}, func(l string) float64 {
		if l == "praise" {
			return 0.1
		}
		return fromFile[l]
	})

	for _, args := range [][]string{
		{"--min-confidence", "weather=0.5"},
		{"--thresholds", "../../testdata/demo/dev.jsonl"},
	} {
		if code, _, errs := runCmd(t, "", append([]string{"tag", "-m", m}, args...)...); code != exitUsage || !strings.Contains(errs, "try:") {
			t.Errorf("%v: exit %d, %s", args, code, errs)
		}
	}
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}
