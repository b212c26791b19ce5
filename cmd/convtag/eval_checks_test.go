package main

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"convtag/model"
	"convtag/model/safetensors"
	"convtag/model/token"
)

// evalVariant loads the committed eval model as a writable copy, lets edit
// change it, and saves it under dir.
func evalVariant(t *testing.T, dir, name string, edit func(m *model.Model)) string {
	t.Helper()
	b, err := os.ReadFile(fixture(t))
	if err != nil {
		t.Fatal(err)
	}
	m, err := model.Load(b, name)
	if err != nil {
		t.Fatal(err)
	}
	edit(m)
	p := filepath.Join(dir, name)
	if err := m.Save(p, model.SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	return p
}

// poisonFold writes +Inf into every non-padding entry of the first fold
// table of the model file at path, in place. The checksum then no longer
// matches, but only Verify reads it.
func poisonFold(t *testing.T, path string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	_, tensors, err := safetensors.Parse(b)
	if err != nil {
		t.Fatal(err)
	}
	for _, ts := range tensors {
		if ts.Name != model.FoldName(0) {
			continue
		}
		row := ts.Shape[1] * ts.Shape[2] * 4 // padding row 0 stays zero
		inf := math.Float32bits(float32(math.Inf(1)))
		for i := row; i+4 <= len(ts.Data); i += 4 {
			ts.Data[i], ts.Data[i+1], ts.Data[i+2], ts.Data[i+3] = byte(inf), byte(inf>>8), byte(inf>>16), byte(inf>>24)
		}
		if err := os.WriteFile(path, b, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	t.Fatal("no fold table")
}

// TestEvalRefusesNonFinite: a model or baseline whose probabilities are
// NaN or infinite is refused with one line naming the record, instead of
// hanging in the metrics (a NaN score never compared equal to itself).
func TestEvalRefusesNonFinite(t *testing.T) {
	dir := t.TempDir()
	// Finite weights that overflow: every logit becomes +Inf, and
	// softmax gives Inf − Inf = NaN.
	overflow := evalVariant(t, dir, "overflow.safetensors", func(m *model.Model) {
		for i := range m.Convs {
			for j := range m.Convs[i].B {
				m.Convs[i].B[j] = 1e30
			}
		}
		for i := range m.Out.W {
			m.Out.W[i] = 3e38
		}
	})
	folded := evalVariant(t, dir, "inf-fold.safetensors", func(m *model.Model) { model.FoldModel(m, false) })
	poisonFold(t, folded)
	// A stored baseline fitted on no document: every prior is log 0.
	emptyNB := evalVariant(t, dir, "empty-baseline.safetensors", func(m *model.Model) {
		m.Baseline = []byte(fmt.Sprintf("nb1 %d 1\n%s\n", len(m.Labels), strings.TrimSpace(strings.Repeat("0 ", len(m.Labels)))))
	})
	elsewhere := filepath.Join(dir, "other-labels.jsonl")
	if err := os.WriteFile(elsewhere, []byte(`{"text":"the gulls took my chips","label":"wildlife"}
{"text":"fog over the pier again","label":"weather"}
`), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		args []string
		code int
		msg  []string
	}{
		{"overflowing weights", []string{"eval", "--no-baseline", "-m", overflow, demoDev}, exitUsage,
			[]string{overflow + ": model gives a non-finite probability for " + demoDev + ":1 ", "try: convtag inspect --verify"}},
		{"infinite fold table", []string{"eval", "--no-baseline", "-m", folded, demoDev}, exitUsage,
			[]string{folded + ": model gives a non-finite probability for " + demoDev + ":1 "}},
		{"baseline fitted on nothing", []string{"eval", "-m", emptyNB, demoDev}, exitUsage,
			[]string{"baseline (stored in the model file) gives a non-finite probability for " + demoDev + ":1 "}},
		{"baseline-train without the model's labels", []string{"eval", "-m", evalModel, "--baseline-train", elsewhere, demoDev}, exitFailure,
			[]string{"--baseline-train " + elsewhere + ": no record has a label of the model (", `"tickets"`}},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := runCmd(t, "", c.args...)
			if code != c.code {
				t.Errorf("exit %d, want %d; stderr %q", code, c.code, errs)
			}
			if !strings.HasPrefix(errs, "convtag: eval: ") {
				t.Errorf("stderr %q does not start with convtag: eval:", errs)
			}
			for _, m := range c.msg {
				if !strings.Contains(errs, m) {
					t.Errorf("stderr %q lacks %q", errs, m)
				}
			}
			if out != "" {
				t.Errorf("stdout %q, want nothing", out)
			}
		})
	}
}

// TestEvalErrorLinesCapped: error and warning lines quote at most a few of
// the user's values, each cut short, however many labels a model has.
func TestEvalErrorLinesCapped(t *testing.T) {
	dir := t.TempDir()
	long := strings.Repeat("harbour-", 1000) // 8,000 bytes
	labels := []string{long}
	for i := range 5000 {
		labels = append(labels, fmt.Sprintf("berth-%04d", i))
	}
	cfg := model.Config{Dim: 4, Widths: []int{3}, Filters: 2, Buckets: 8}
	m, err := model.New(cfg, token.Settings{}, labels, []string{"ferry", "fog"}, 1)
	if err != nil {
		t.Fatal(err)
	}
	many := filepath.Join(dir, "many.safetensors")
	if err := m.Save(many, model.SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	var in bytes.Buffer
	for i := range 3000 {
		fmt.Fprintf(&in, "{\"text\":\"fog at the pier\",\"label\":\"unheard-%04d-%s\"}\n", i, long)
	}
	code, _, errs := runCmd(t, in.String(), "eval", "--no-baseline", "-m", many, "-")
	if code != exitFailure || !strings.Contains(errs, "no record has a label of") || !strings.Contains(errs, "and 4993 more)") {
		t.Fatalf("exit %d, stderr %.300q", code, errs)
	}
	lines := strings.Split(strings.TrimSuffix(errs, "\n"), "\n")
	if len(lines) != 2 {
		t.Errorf("%d stderr lines, want the warning and the error", len(lines))
	}
	for _, l := range lines {
		if len(l) >= 1000 {
			t.Errorf("stderr line of %d bytes: %.200q…", len(l), l)
		}
	}
}

// TestInspectVerify: inspect --verify reports, with exit 2 and the file's
// name, what tag and eval could not use, including a max_tokens beyond
// the limit (refused as the file is opened).
func TestInspectVerify(t *testing.T) {
	dir := t.TempDir()
	overflow := evalVariant(t, dir, "overflow.safetensors", func(m *model.Model) {
		for i := range m.Convs {
			for j := range m.Convs[i].B {
				m.Convs[i].B[j] = 1e30
			}
		}
		for i := range m.Out.W {
			m.Out.W[i] = 3e38
		}
	})
	garbage := evalVariant(t, dir, "garbage-baseline.safetensors", func(m *model.Model) { m.Baseline = []byte("not a baseline") })
	huge := filepath.Join(dir, "huge-max-tokens.safetensors")
	b, err := os.ReadFile(fixture(t))
	if err != nil {
		t.Fatal(err)
	}
	meta, tensors, err := safetensors.Parse(b)
	if err != nil {
		t.Fatal(err)
	}
	meta[model.MetaTokenizer] = `{"keep_punct":false,"max_tokens":1073741824,"no_placeholders":false}`
	var buf bytes.Buffer
	if err := safetensors.Encode(&buf, meta, tensors); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(huge, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name, path, msg string
		code            int
	}{
		{"good", evalModel, "", exitOK},
		{"overflowing weights", overflow, "forward pass gives no probabilities", exitUsage},
		{"garbage baseline", garbage, "bad baseline", exitUsage},
		{"huge max_tokens", huge, "max_tokens 1073741824 out of range", exitUsage},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := runCmd(t, "", "inspect", "--verify", c.path)
			if code != c.code {
				t.Fatalf("exit %d, want %d; stderr %q", code, c.code, errs)
			}
			if c.code == exitOK {
				if !strings.Contains(out, "verified:") {
					t.Errorf("stdout lacks the verified line: %q", out)
				}
				return
			}
			if !strings.HasPrefix(errs, "convtag: model: "+c.path+": ") || !strings.Contains(errs, c.msg) || strings.Count(errs, "\n") != 1 {
				t.Errorf("stderr %q, want one line naming %s and %q", errs, c.path, c.msg)
			}
		})
	}
}
