package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"convtag/model"
)

const (
	multiTrain = "../../testdata/demo/multi-train.jsonl"
	multiDev   = "../../testdata/demo/multi-dev.jsonl"
)

// trainMulti trains a small multi-label model on the demo and returns its
// path and train's stderr.
func trainMulti(t *testing.T, extra ...string) (string, string, string) {
	t.Helper()
	out := filepath.Join(t.TempDir(), "multi.safetensors")
	args := append([]string{"train", "-o", out, "--vector-size", "16", "--filters", "16", "--unseen-rows", "50", "--epochs", "8", "-q", "-j", "2"}, extra...)
	args = append(args, multiTrain, "--dev", multiDev)
	code, stdout, stderr := runCmd(t, "", args...)
	if code != exitOK {
		t.Fatalf("train: exit %d: %s", code, stderr)
	}
	return out, stdout, stderr
}

// TestTrainMultiAuto: arrays of tags make a multi-label model (said on
// stderr) with a threshold per tag; the same run twice gives the same
// bytes; --multi-label=false trains on the first tags instead.
func TestTrainMultiAuto(t *testing.T) {
	path, stdout, stderr := trainMulti(t)
	if !strings.Contains(stderr, "have an array of tags: training a multi-label model") {
		t.Errorf("no note on stderr: %q", stderr)
	}
	if !strings.Contains(stdout, "dev micro-F1: network 0.") || !strings.Contains(stdout, "tag thresholds (f1 on dev): lost-and-found=") {
		t.Errorf("stdout: %q", stdout)
	}
	m, err := model.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	if !m.Multi || len(m.Thresholds) != 5 {
		t.Fatalf("multi %v thresholds %v", m.Multi, m.Thresholds)
	}
	if err := m.Verify(); err != nil {
		t.Errorf("Verify: %v", err)
	}
	var sum trainSummary
	if err := json.Unmarshal([]byte(m.Meta[model.MetaTraining]), &sum); err != nil {
		t.Fatal(err)
	}
	if sum.Mode != model.ModeMulti || len(sum.Thresholds) != 5 || sum.Records["train_no_tag"] == 0 {
		t.Errorf("summary: mode %q thresholds %+v records %v", sum.Mode, sum.Thresholds, sum.Records)
	}
	for c, lt := range sum.Thresholds {
		if lt.Threshold != m.Thresholds[c] || !lt.Tuned {
			t.Errorf("summary threshold %+v, model %v", lt, m.Thresholds[c])
		}
	}
	again, _, _ := trainMulti(t)
	a, _ := os.ReadFile(path)
	b, _ := os.ReadFile(again)
	if !bytes.Equal(a, b) {
		t.Error("two multi-label runs with the same flags differ")
	}
	goal, stdout, _ := trainMulti(t, "--label-threshold-goal", "precision:0.8", "--class-weights", "balanced")
	if !strings.Contains(stdout, "tag thresholds (precision:0.8 on dev)") {
		t.Errorf("goal not reported: %q", stdout)
	}
	gm, err := model.Open(goal)
	if err != nil {
		t.Fatal(err)
	}
	defer gm.Close()
	if slices.Equal(gm.Thresholds, m.Thresholds) {
		t.Error("a precision goal and balanced weights left the thresholds as they were")
	}

	single, _, stderr := trainMulti(t, "--multi-label=false")
	// Single-label asked for: an empty array is no label, skipped as ever.
	if !strings.Contains(stderr, "training uses the first of each") || !strings.Contains(stderr, "36 training records skipped") {
		t.Errorf("single-label notes missing: %q", stderr)
	}
	sm, err := model.Open(single)
	if err != nil {
		t.Fatal(err)
	}
	defer sm.Close()
	if sm.Multi {
		t.Error("--multi-label=false made a multi-label model")
	}
	code, _, stderr := runCmd(t, "", "train", "-o", filepath.Join(t.TempDir(), "x"), "--label-threshold-goal", "recall:0.9", multiTrain)
	if code != exitUsage || !strings.Contains(stderr, "want f1 or precision:P") {
		t.Errorf("bad goal: exit %d %q", code, stderr)
	}
}

// TestTagMulti recomputes every record's tags from its own --scores and
// the model's stored thresholds (or the --min-confidence overrides), and
// checks --keep, the TSV columns and eval's predicted counts against it.
func TestTagMulti(t *testing.T) {
	path, _, _ := trainMulti(t)
	m, err := model.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	in, err := os.ReadFile(multiDev)
	if err != nil {
		t.Fatal(err)
	}
	type rec struct {
		Text       string
		Tags       []string
		Confidence map[string]float64
		Scores     map[string]float64
	}
	tagged := func(args ...string) []rec {
		t.Helper()
		code, stdout, stderr := runCmd(t, string(in), append([]string{"tag", "-m", path, "--scores", "-j", "2"}, args...)...)
		if code != exitOK {
			t.Fatalf("tag: exit %d: %s", code, stderr)
		}
		var out []rec
		sc := bufio.NewScanner(strings.NewReader(stdout))
		for sc.Scan() {
			var r rec
			if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
				t.Fatalf("%v: %s", err, sc.Text())
			}
			out = append(out, r)
		}
		return out
	}
	check := func(recs []rec, th map[string]float64) map[string]int {
		t.Helper()
		counts := map[string]int{}
		given := 0
		for _, r := range recs {
			var want []string
			for _, l := range m.Labels {
				// Scores are rounded to 4 decimals; a tag within
				// rounding of its threshold is not decided by them.
				if math.Abs(r.Scores[l]-th[l]) < 1e-4 {
					want = nil
					goto next
				}
				if r.Scores[l] >= th[l] {
					want = append(want, l)
				}
			}
			slices.SortStableFunc(want, func(a, b string) int {
				switch {
				case r.Scores[a] > r.Scores[b]:
					return -1
				case r.Scores[a] < r.Scores[b]:
					return 1
				}
				return 0
			})
			if !slices.Equal(r.Tags, want) && !(len(want) == 0 && len(r.Tags) == 0) {
				t.Errorf("%q: tags %v, from its scores %v", r.Text, r.Tags, want)
			}
		next:
			given += len(r.Tags)
			for _, l := range r.Tags {
				counts[l]++
				if r.Confidence[l] != r.Scores[l] {
					t.Errorf("%q: confidence of %s %v, score %v", r.Text, l, r.Confidence[l], r.Scores[l])
				}
			}
		}
		if given == 0 || given == len(recs)*len(m.Labels) {
			t.Errorf("%d of %d record-tag pairs given: the check does not tell a tag from none", given, len(recs)*len(m.Labels))
		}
		return counts
	}
	stored := map[string]float64{}
	for c, l := range m.Labels {
		stored[l] = m.Thresholds[c]
	}
	recs := tagged()
	if len(recs) != 66 {
		t.Fatalf("%d records out of 66", len(recs))
	}
	counts := check(recs, stored)

	over := map[string]float64{}
	for l, v := range stored {
		over[l] = v
	}
	over["tickets"], over["spam"] = 0.9, 0.2
	check(tagged("--min-confidence", "tickets=0.9,spam=0.2"), over)

	for _, r := range tagged("--keep", "spam,praise") {
		if !slices.Contains(r.Tags, "spam") && !slices.Contains(r.Tags, "praise") {
			t.Errorf("--keep spam,praise kept %q with %v", r.Text, r.Tags)
		}
	}

	code, stdout, stderr := runCmd(t, "lost my wallet on the ferry, thanks crew\n", "tag", "-m", path, "--format", "text", "--tags-key", "labels")
	if code != exitOK {
		t.Fatalf("text: %d %s", code, stderr)
	}
	cols := strings.SplitN(strings.TrimSuffix(stdout, "\n"), "\t", 3)
	if len(cols) != 3 || cols[2] != "lost my wallet on the ferry, thanks crew" || len(strings.Split(cols[0], ",")) != len(strings.Split(cols[1], ",")) {
		t.Errorf("text output %q", stdout)
	}

	code, stdout, stderr = runCmd(t, "", "eval", "-m", path, "--json", multiDev)
	if code != exitOK {
		t.Fatalf("eval: %d %s", code, stderr)
	}
	var rep struct {
		Mode     string
		PerLabel []struct {
			Label     string
			Predicted int
			Support   int
		} `json:"per_label"`
	}
	if err := json.Unmarshal([]byte(stdout), &rep); err != nil || rep.Mode != model.ModeMulti {
		t.Fatalf("eval JSON: %v %q", err, stdout[:min(200, len(stdout))])
	}
	for _, s := range rep.PerLabel {
		if s.Predicted != counts[s.Label] {
			t.Errorf("eval says %s predicted %d times, tag gave it %d times", s.Label, s.Predicted, counts[s.Label])
		}
	}
}

// TestEvalMultiThresholds: eval --json --target-precision writes per-tag
// thresholds that tag --thresholds reads, giving the same tags as typing
// them with --min-confidence.
func TestEvalMultiThresholds(t *testing.T) {
	path, _, _ := trainMulti(t)
	code, stdout, stderr := runCmd(t, "", "eval", "-m", path, "--json", "--target-precision", "0.8", multiDev)
	if code != exitOK {
		t.Fatalf("eval: %d %s", code, stderr)
	}
	file := filepath.Join(t.TempDir(), "th.json")
	if err := os.WriteFile(file, []byte(stdout), 0o644); err != nil {
		t.Fatal(err)
	}
	var rep struct {
		Target struct {
			PerLabel []struct {
				Label     string
				Threshold float64
				Reached   bool
			} `json:"per_label"`
		}
	}
	if err := json.Unmarshal([]byte(stdout), &rep); err != nil || len(rep.Target.PerLabel) != 5 {
		t.Fatalf("%v %+v", err, rep)
	}
	var per []string
	for _, l := range rep.Target.PerLabel {
		// --thresholds never gives a tag whose target was not reached;
		// 1 is the closest --min-confidence says (a sigmoid of 1.0 aside).
		v := "1"
		if l.Reached {
			v = strconv.FormatFloat(l.Threshold, 'f', -1, 64)
		}
		per = append(per, l.Label+"="+v)
	}
	in, _ := os.ReadFile(multiDev)
	_, a, _ := runCmd(t, string(in), "tag", "-m", path, "--thresholds", file)
	_, b, errb := runCmd(t, string(in), "tag", "-m", path, "--min-confidence", strings.Join(per, ","))
	if a != b {
		t.Errorf("--thresholds and --min-confidence differ (%s)", errb)
	}
	code, stdout, _ = runCmd(t, "", "eval", "-m", path, "--target-precision", "0.8", "--baseline-train", multiTrain, multiDev)
	for _, want := range []string{"micro-F1", "Hamming loss", "exact tag sets", "naive Bayes one-vs-rest", "per tag: convtag tag -m"} {
		if code != exitOK || !strings.Contains(stdout, want) {
			t.Errorf("eval text lacks %q (exit %d)", want, code)
		}
	}
}
