package train

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"os"
	"slices"
	"testing"

	"convtag/model"
)

func readDemoRecords(t *testing.T, name string) []Record {
	t.Helper()
	f, err := os.Open("../../testdata/demo/" + name)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []Record
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r Record
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		out = append(out, r)
	}
	return out
}

// smallRecipe is a quick recipe for tests.
func smallRecipe() Recipe {
	r := Defaults()
	r.Dim, r.Filters, r.Buckets, r.Epochs, r.Jobs = 16, 8, 50, 3, 2
	return r
}

func encoded(t *testing.T, m *model.Model, s *Summary) []byte {
	t.Helper()
	if err := s.Store(m); err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := m.Encode(&b, model.SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// TestRecipeFit runs the recipe twice on the demo records and wants the
// same model bytes, a held-out dev split of DevFraction when given no dev
// records, and a summary that adds up.
func TestRecipeFit(t *testing.T) {
	recs := readDemoRecords(t, "train.jsonl")
	r := smallRecipe()
	var warned []string
	p := Progress{Warn: func(m string) { warned = append(warned, m) }}
	m1, s1, err := r.Fit(context.Background(), recs, nil, p)
	if err != nil {
		t.Fatal(err)
	}
	m2, s2, err := r.Fit(context.Background(), recs, nil, Progress{})
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(encoded(t, m1, s1), encoded(t, m2, s2)) {
		t.Error("the same recipe and records give different model bytes")
	}
	if len(warned) != 0 {
		t.Errorf("warnings %q", warned)
	}
	tr, dv := s1.Records["train"], s1.Records["dev"]
	if tr+dv != len(recs) || dv < len(recs)/20 || dv > len(recs)/5 {
		t.Errorf("%d train + %d dev records of %d with dev fraction %v", tr, dv, len(recs), r.DevFraction)
	}
	if s1.EpochsRun != r.Epochs || len(s1.Curve) != r.Epochs || s1.BestEpoch < 1 || m1.Baseline == nil || m1.Fold == nil {
		t.Errorf("summary %+v, baseline %d bytes, folded %v", s1, len(m1.Baseline), m1.Fold != nil)
	}
	want := []string{"lost-and-found", "praise", "schedule", "spam", "tickets"}
	if !slices.Equal(m1.Labels, want) {
		t.Errorf("labels %q, want %q", m1.Labels, want)
	}
}

// TestRecipeDev: given dev records, Fit trains on all of train, scores on
// dev, and leaves out dev records of labels the model lacks, with a warning.
func TestRecipeDev(t *testing.T) {
	recs := readDemoRecords(t, "train.jsonl")
	dev := append(readDemoRecords(t, "dev.jsonl"), Record{Text: "a line of a label never trained on", Label: "weather"})
	r := smallRecipe()
	r.NoFold = true
	var warned []string
	_, s, err := r.Fit(context.Background(), recs, dev, Progress{Warn: func(m string) { warned = append(warned, m) }})
	if err != nil {
		t.Fatal(err)
	}
	if s.Records["train"] != len(recs) || s.Records["dev"] != len(dev)-1 || len(warned) != 1 {
		t.Errorf("records %v of %d and %d; warnings %q", s.Records, len(recs), len(dev), warned)
	}
}

// TestRecipeLabels: a recipe with Labels keeps them, in order, even when
// the training records lack one; fewer than two labels is a FewLabelsError.
func TestRecipeLabels(t *testing.T) {
	recs := readDemoRecords(t, "train.jsonl")
	r := smallRecipe()
	r.Epochs, r.NoFold = 1, true
	r.Labels = []string{"tickets", "spam", "praise", "schedule", "lost-and-found", "weather"}
	m, _, err := r.Fit(context.Background(), recs, nil, Progress{})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(m.Labels, r.Labels) {
		t.Errorf("labels %q, want %q", m.Labels, r.Labels)
	}
	r.Labels = nil
	var few *FewLabelsError
	if _, _, err := r.Fit(context.Background(), recs[:1], nil, Progress{}); !errors.As(err, &few) || few.Found != 1 {
		t.Errorf("one record: %v", err)
	}
}

// TestRecipeStop: a cancelled context stops Fit with ErrStopped.
func TestRecipeStop(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, _, err := smallRecipe().Fit(ctx, readDemoRecords(t, "train.jsonl"), nil, Progress{}); !errors.Is(err, ErrStopped) {
		t.Errorf("got %v, want ErrStopped", err)
	}
}
