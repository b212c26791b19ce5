package main

import (
	"bufio"
	"encoding/json"
	"flag"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	"convtag/model/metrics"
)

var (
	update      = flag.Bool("update", false, "rewrite the golden files under testdata/")
	regenFixure = flag.Bool("regen-eval-model", false, "retrain testdata/eval/demo-small.safetensors from the demo data")
)

// evalModel is a small model trained on the demo data, committed so that
// the golden output does not depend on training giving bit-identical
// weights on every CPU. -regen-eval-model rebuilds it with the command
// below (then run with -update).
const evalModel = "testdata/eval/demo-small.safetensors"

var evalModelArgs = []string{"train", "-q", "-o", evalModel, "-j", "1", "--seed", "1",
	"--vector-size", "16", "--filters", "12", "--unseen-rows", "64", "--no-fold",
	"--dev", "../../testdata/demo/dev.jsonl", "../../testdata/demo/train.jsonl"}

const demoDev = "../../testdata/demo/dev.jsonl"

var regenOnce sync.Once

// fixture returns the committed model's path, rebuilding it first (once)
// under -regen-eval-model.
func fixture(t *testing.T) string {
	t.Helper()
	regenOnce.Do(func() {
		if *regenFixure {
			if code, _, errs := runCmd(t, "", evalModelArgs...); code != exitOK {
				t.Fatalf("retraining %s: %s", evalModel, errs)
			}
		}
	})
	return evalModel
}

func golden(t *testing.T, name, got string) {
	t.Helper()
	path := filepath.Join("testdata", "eval", name+".golden")
	if *update {
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if got == string(want) {
		return
	}
	if strings.HasSuffix(name, "-json") && jsonClose(t, string(want), got) {
		return
	}
	t.Errorf("%s differs from %s (run with -update to accept):\n%s", name, path, firstDiff(string(want), got))
}

// jsonClose reports whether two JSON documents are equal but for numbers
// within a relative 1e-6 of each other. The forward kernels sum float32
// products in an order of their own (AVX-512, AVX2 and plain Go differ),
// so a probability's last bits, and figures like the calibration error
// that average them in float64, differ from CPU to CPU in the 9th digit
// or so; the printed text (4 decimals) does not. Counts, labels and keys
// must match exactly.
func jsonClose(t *testing.T, want, got string) bool {
	t.Helper()
	var w, g any
	dw, dg := json.NewDecoder(strings.NewReader(want)), json.NewDecoder(strings.NewReader(got))
	dw.UseNumber()
	dg.UseNumber()
	if dw.Decode(&w) != nil || dg.Decode(&g) != nil {
		return false
	}
	var close func(a, b any) bool
	close = func(a, b any) bool {
		switch a := a.(type) {
		case map[string]any:
			b, ok := b.(map[string]any)
			if !ok || len(a) != len(b) {
				return false
			}
			for k, v := range a {
				if bv, ok := b[k]; !ok || !close(v, bv) {
					return false
				}
			}
			return true
		case []any:
			b, ok := b.([]any)
			if !ok || len(a) != len(b) {
				return false
			}
			for i := range a {
				if !close(a[i], b[i]) {
					return false
				}
			}
			return true
		case json.Number:
			b, ok := b.(json.Number)
			if !ok {
				return false
			}
			if a == b {
				return true
			}
			x, err1 := a.Float64()
			y, err2 := b.Float64()
			return err1 == nil && err2 == nil && math.Abs(x-y) <= 1e-6*max(math.Abs(x), math.Abs(y))
		default:
			return a == b
		}
	}
	if close(w, g) {
		t.Logf("JSON equal to the golden file within 1e-6 (this CPU's kernels round differently)")
		return true
	}
	return false
}

func firstDiff(want, got string) string {
	w, g := strings.Split(want, "\n"), strings.Split(got, "\n")
	for i := range max(len(w), len(g)) {
		var a, b string
		if i < len(w) {
			a = w[i]
		}
		if i < len(g) {
			b = g[i]
		}
		if a != b {
			return "line " + strconv.Itoa(i+1) + ":\nwant " + strconv.Quote(a) + "\ngot  " + strconv.Quote(b)
		}
	}
	return ""
}

func TestEvalGolden(t *testing.T) {
	fixture(t)
	for _, c := range []struct {
		name string
		args []string
	}{
		{"demo", []string{"eval", "-m", evalModel, "--target-precision", "0.9", demoDev}},
		{"demo-json", []string{"eval", "-m", evalModel, "--json", "--target-precision", "0.95", demoDev}},
		{"demo-no-baseline", []string{"eval", "-m", evalModel, "--no-baseline", demoDev}},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := runCmd(t, "", c.args...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, errs)
			}
			golden(t, c.name, out)
		})
	}
}

type evalJSON struct {
	metrics.Report
	Baseline *struct {
		Source string `json:"source"`
		metrics.Report
	} `json:"baseline"`
	Plots         []string       `json:"plots"`
	UnknownLabels map[string]int `json:"unknown_labels"`
}

func evalJSONOf(t *testing.T, args ...string) evalJSON {
	t.Helper()
	code, out, errs := runCmd(t, "", append([]string{"eval", "--json"}, args...)...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r evalJSON
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	return r
}

// TestEvalMatchesTraining checks eval against what train itself measured
// on the same dev file: the network's accuracy and macro-F1 at the kept
// epoch, and the stored baseline's, are in the training summary.
func TestEvalMatchesTraining(t *testing.T) {
	fixture(t)
	r := evalJSONOf(t, "-m", evalModel, demoDev)
	code, out, _ := runCmd(t, "", "inspect", "--json", evalModel)
	if code != exitOK {
		t.Fatal("inspect failed")
	}
	type figs struct {
		DevAccuracy float64 `json:"dev_accuracy"`
		DevMacroF1  float64 `json:"dev_macro_f1"`
	}
	var in struct {
		Training struct {
			Network  figs `json:"network"`
			Baseline figs `json:"baseline"`
		} `json:"training"`
	}
	if err := json.Unmarshal([]byte(out), &in); err != nil || in.Training.Network.DevAccuracy == 0 {
		t.Fatalf("no training summary in %s: %v", evalModel, err)
	}
	const tol = 1e-12
	if math.Abs(r.Accuracy-in.Training.Network.DevAccuracy) > tol || math.Abs(r.MacroF1-in.Training.Network.DevMacroF1) > tol {
		t.Errorf("network: eval %v / %v, train measured %v / %v", r.Accuracy, r.MacroF1, in.Training.Network.DevAccuracy, in.Training.Network.DevMacroF1)
	}
	if r.Baseline == nil {
		t.Fatal("no baseline figures")
	}
	if math.Abs(r.Baseline.Accuracy-in.Training.Baseline.DevAccuracy) > tol || math.Abs(r.Baseline.MacroF1-in.Training.Baseline.DevMacroF1) > tol {
		t.Errorf("baseline: eval %v / %v, train measured %v / %v", r.Baseline.Accuracy, r.Baseline.MacroF1, in.Training.Baseline.DevAccuracy, in.Training.Baseline.DevMacroF1)
	}
	// Refitting the baseline on the training file gives the stored one.
	rf := evalJSONOf(t, "-m", evalModel, "--baseline-train", "../../testdata/demo/train.jsonl", demoDev)
	if rf.Baseline == nil || rf.Baseline.Accuracy != r.Baseline.Accuracy || rf.Baseline.Calibration.ECE != r.Baseline.Calibration.ECE ||
		!strings.HasPrefix(rf.Baseline.Source, "fitted on ") {
		t.Errorf("refitted baseline %+v differs from the stored one", rf.Baseline)
	}
}

// TestEvalThresholdForTag runs tag with the threshold eval recommends and
// checks that the records it leaves tagged are exactly as many, and as
// precise, as eval said.
func TestEvalThresholdForTag(t *testing.T) {
	fixture(t)
	for _, target := range []string{"0.8", "0.9", "0.95"} {
		r := evalJSONOf(t, "-m", evalModel, "--no-baseline", "--target-precision", target, demoDev)
		op := r.Target.Overall
		if !op.Reached {
			t.Logf("target %s not reached; checking the best threshold %v", target, op.Threshold)
		}
		thr := strconv.FormatFloat(op.Threshold, 'f', -1, 64)
		code, out, errs := runCmd(t, "", "tag", "-m", evalModel, "-j", "1", "--min-confidence", thr, demoDev)
		if code != exitOK {
			t.Fatalf("tag: exit %d: %s", code, errs)
		}
		kept, right := 0, 0
		sc := bufio.NewScanner(strings.NewReader(out))
		for sc.Scan() {
			var rec struct{ Label, Tag string }
			if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
				t.Fatalf("tag output: %v", err)
			}
			if rec.Tag != "unsure" {
				kept++
				if rec.Tag == rec.Label {
					right++
				}
			}
		}
		if kept != op.Kept || math.Abs(float64(right)/float64(kept)-float64(op.Precision)) > 1e-12 {
			t.Errorf("target %s, --min-confidence %s: tag kept %d (%d right), eval said %d at precision %v", target, thr, kept, right, op.Kept, op.Precision)
		}
		if op.Reached && float64(right)/float64(kept) < mustFloat(t, target) {
			t.Errorf("target %s: tag's precision %d/%d is below it", target, right, kept)
		}
	}
}

func mustFloat(t *testing.T, s string) float64 {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestEvalPlots(t *testing.T) {
	fixture(t)
	dir := t.TempDir()
	r := evalJSONOf(t, "-m", evalModel, "--plots", dir, demoDev)
	if len(r.Plots) != 4 {
		t.Fatalf("plots %v, want 4 files", r.Plots)
	}
	for _, p := range r.Plots {
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(f)
		f.Close()
		if err != nil {
			t.Errorf("%s: %v", p, err)
		} else if b := img.Bounds(); b.Dx() < 200 || b.Dy() < 200 {
			t.Errorf("%s: %v", p, b)
		}
	}
}

func TestEvalUnknownLabels(t *testing.T) {
	fixture(t)
	in := `{"text":"when does the first boat leave","label":"schedule"}
{"text":"is there a bar on board","label":"catering"}
{"text":"the crew were lovely","label":"praise"}
{"text":"no label here"}
`
	code, out, errs := runCmd(t, in, "eval", "-m", evalModel, "--json", "-")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r evalJSON
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if r.Records != 2 || r.UnknownLabels["catering"] != 1 {
		t.Errorf("records %d, unknown %v; want 2 and catering 1", r.Records, r.UnknownLabels)
	}
	if !strings.Contains(errs, `"catering" 1`) || !strings.Contains(errs, "-:4") || !strings.Contains(errs, "1 records skipped") {
		t.Errorf("stderr does not report the unknown label and the skipped line: %q", errs)
	}
}

func TestEvalErrors(t *testing.T) {
	fixture(t)
	for _, c := range []struct {
		name string
		args []string
		code int
		msg  string
	}{
		{"no files", []string{"eval", "-m", evalModel}, exitUsage, "no labelled input"},
		{"target", []string{"eval", "-m", evalModel, "--target-precision", "1.5", demoDev}, exitUsage, "target-precision"},
		{"plot format", []string{"eval", "-m", evalModel, "--plot-format", "gif", demoDev}, exitUsage, "plot-format"},
		{"training flag without folds", []string{"eval", "-m", evalModel, "--epochs", "3", demoDev}, exitUsage, "--epochs only apply with --folds"},
		{"folds with model", []string{"eval", "--folds", "3", "-m", evalModel, demoDev}, exitUsage, "leave out -m"},
		{"one fold", []string{"eval", "--folds", "1", demoDev}, exitUsage, "at least 2"},
		// Recipe.Check runs before any record is read: the missing file is
		// never opened.
		{"folds, bad recipe", []string{"eval", "--folds", "3", "--epochs", "0", "no/such.jsonl"}, exitUsage, "eval: model: bad recipe: --epochs 0"},
		{"folds, bad shape", []string{"eval", "--folds", "3", "--widths", "0", "no/such.jsonl"}, exitUsage, "network shape"},
		{"missing file", []string{"eval", "-m", evalModel, "no/such.jsonl"}, exitFailure, "no/such.jsonl"},
		{"no known labels", []string{"eval", "-m", evalModel, "--format", "label-tab-text", "testdata/eval/unknown.tsv"}, exitFailure, "no record has a label"},
		{"bad model", []string{"eval", "-m", demoDev, demoDev}, exitUsage, "dev.jsonl"},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, errs := runCmd(t, "", c.args...)
			if code != c.code || !strings.Contains(errs, c.msg) || !strings.HasPrefix(errs, "convtag: ") {
				t.Errorf("exit %d, stderr %q; want %d and %q", code, errs, c.code, c.msg)
			}
			if n := strings.Count(strings.TrimSpace(errs), "\n"); n > 2 {
				t.Errorf("stderr has %d lines: %q", n+1, errs)
			}
		})
	}
}

// TestEvalFolds runs a small cross-validation (3 folds, 2 epochs, tiny
// network; well under a second) and checks its bookkeeping: every record is
// tested once, the folds are stratified, and the summary is the mean and
// sample standard deviation of the folds' figures.
func TestEvalFolds(t *testing.T) {
	args := []string{"eval", "--json", "--folds", "3", "--epochs", "2", "--vector-size", "8", "--filters", "4", "--unseen-rows", "16", "-j", "1", "../../testdata/demo/train.jsonl"}
	code, out, errs := runCmd(t, "", args...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r foldsOutput
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if len(r.PerFold) != 3 || r.Records == 0 {
		t.Fatalf("folds %+v", r)
	}
	test := 0
	var accs, bases []float64
	for _, f := range r.PerFold {
		test += f.Test
		if f.Train+f.Dev+f.Test != r.Records {
			t.Errorf("fold %d: %d+%d+%d records, want %d", f.Fold, f.Train, f.Dev, f.Test, r.Records)
		}
		if d := f.Test - r.Records/3; d < 0 || d > 1 {
			t.Errorf("fold %d tests %d of %d records", f.Fold, f.Test, r.Records)
		}
		for _, v := range []float64{f.NetAcc, f.NetF1, f.BaseAcc, f.BaseF1} {
			if !(v >= 0 && v <= 1) {
				t.Errorf("fold %d: figure %v out of range", f.Fold, v)
			}
		}
		accs, bases = append(accs, f.NetAcc), append(bases, f.BaseAcc)
	}
	if test != r.Records {
		t.Errorf("folds test %d records, want each of %d once", test, r.Records)
	}
	if s := metrics.MeanStd(accs); s.Mean != r.Network.Accuracy.Mean || s.Std != r.Network.Accuracy.Std {
		t.Errorf("network accuracy %v, folds give %v", r.Network.Accuracy, s)
	}
	// The baseline needs no training luck: on the demo's five well-separated
	// tags it must do far better than chance (0.2).
	if s := metrics.MeanStd(bases); s.Mean != r.Baseline.Accuracy.Mean || s.Mean < 0.6 {
		t.Errorf("baseline accuracy %v, folds give %v", r.Baseline.Accuracy, s)
	}
	// The text form has a line per fold and the mean ± std lines.
	code, out, _ = runCmd(t, "", append([]string{"eval"}, args[2:]...)...)
	if code != exitOK || !strings.Contains(out, "network ") || strings.Count(out, " ± ") != 5 || strings.Count(out, "\n") != 13 {
		t.Errorf("text output:\n%s", out)
	}
}

// TestEvalConservativeTarget: with --conservative the threshold is never
// lower than without, its interval's lower end reaches the target when it
// is reached, and every threshold of the table above the plain one keeps
// the target (the envelope rule).
func TestEvalConservativeTarget(t *testing.T) {
	type op struct {
		Reached     bool    `json:"reached"`
		Threshold   float64 `json:"threshold"`
		Precision   float64 `json:"precision"`
		PrecisionCI struct {
			Low float64 `json:"low"`
		} `json:"precision_ci"`
	}
	type report struct { // the network's figures are at the top level
		Target struct {
			Overall op `json:"overall"`
		} `json:"target"`
		Thresholds struct {
			Overall []struct {
				Threshold float64  `json:"threshold"`
				Precision *float64 `json:"precision"`
			} `json:"overall"`
		} `json:"thresholds"`
	}
	get := func(args ...string) report {
		t.Helper()
		code, out, errs := runCmd(t, "", append([]string{"eval", "--json", "-m", fixture(t), "--target-precision", "0.85"}, append(args, demoDev)...)...)
		if code != exitOK {
			t.Fatalf("exit %d: %s", code, errs)
		}
		var r report
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		return r
	}
	plain, cons := get(), get("--conservative")
	p, c := plain.Target.Overall, cons.Target.Overall
	if !p.Reached {
		t.Fatalf("0.85 not reached on the demo dev set: %+v", p)
	}
	if c.Reached && (c.Threshold < p.Threshold || c.PrecisionCI.Low < 0.85) {
		t.Errorf("conservative %+v against plain %+v", c, p)
	}
	for _, row := range plain.Thresholds.Overall {
		if row.Threshold >= p.Threshold && row.Precision != nil && *row.Precision < 0.85 {
			t.Errorf("threshold %v above the target's %v has precision %v", row.Threshold, p.Threshold, *row.Precision)
		}
	}
	if code, _, errs := runCmd(t, "", "eval", "-m", fixture(t), "--conservative", demoDev); code != exitUsage || !strings.Contains(errs, "--conservative needs --target-precision") {
		t.Errorf("--conservative alone: exit %d, %s", code, errs)
	}
}
