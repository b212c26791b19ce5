package model

import (
	"bytes"
	"convtag/model/safetensors"
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
)

// TestMultiSaveOpen: a multi-label model keeps its mode and thresholds
// through Encode and Load, its probabilities are the logits' sigmoids
// (direct and folded paths), and a single-label file has neither key.
func TestMultiSaveOpen(t *testing.T) {
	m := stModel(t, 10, 0, "F32")
	var single bytes.Buffer
	if err := m.Encode(&single, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	meta, _, err := safetensors.Parse(single.Bytes())
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := meta[MetaMode]; ok {
		t.Errorf("single-label file has %q", MetaMode)
	}
	m.Multi, m.Thresholds = true, []float64{0.5, 0.25, 0.875}
	var buf bytes.Buffer
	if err := m.Encode(&buf, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	back, err := Load(buf.Bytes(), "multi")
	if err != nil {
		t.Fatal(err)
	}
	if !back.Multi || back.Mode() != ModeMulti || !slices.Equal(back.Thresholds, m.Thresholds) {
		t.Fatalf("reopened: multi %v, thresholds %v", back.Multi, back.Thresholds)
	}
	if err := back.Verify(); err != nil {
		t.Errorf("Verify: %v", err)
	}
	for _, direct := range []bool{true, false} {
		p := back.NewPredictor()
		p.SetDirect(direct)
		probs := slices.Clone(p.Predict([]byte("w1 w2 w3 unknown")))
		for c, v := range probs {
			z := float64(p.Logits()[c])
			if math.Abs(float64(v)-1/(1+math.Exp(-z))) > 1e-7 {
				t.Errorf("direct=%v label %d: %v is not sigmoid(%v)", direct, c, v, z)
			}
		}
	}
	// The same weights as single-label give a softmax: same logits.
	ps, pm := m.NewPredictor(), back.NewPredictor()
	m.Multi, m.Thresholds = false, nil
	ps.Predict([]byte("w4 w5"))
	pm.Predict([]byte("w4 w5"))
	if !slices.Equal(ps.Logits(), pm.Logits()) {
		t.Errorf("logits differ between modes: %v, %v", ps.Logits(), pm.Logits())
	}
}

func TestMultiRejects(t *testing.T) {
	m := stModel(t, 10, 0, "")
	m.Multi, m.Thresholds = true, []float64{0.5, 0.5, 0.5}
	var buf bytes.Buffer
	if err := m.Encode(&buf, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, mode, thresholds string
		want                   string
	}{
		{"other mode", "several", "[0.5,0.5,0.5]", "mode"},
		{"no thresholds", ModeMulti, "", MetaThresholds},
		{"too few", ModeMulti, "[0.5,0.5]", "2 values for 3 labels"},
		{"out of range", ModeMulti, "[0.5,1.5,0.5]", "not in [0, 1]"},
		{"negative", ModeMulti, "[0.5,-0.1,0.5]", "not in [0, 1]"},
		{"not numbers", ModeMulti, `["a",0.5,0.5]`, MetaThresholds},
		{"single with thresholds", ModeSingle, "[0.5,0.5,0.5]", MetaThresholds},
	} {
		t.Run(tc.name, func(t *testing.T) {
			meta, ts, err := safetensors.Parse(buf.Bytes())
			if err != nil {
				t.Fatal(err)
			}
			meta[MetaMode] = tc.mode
			delete(meta, MetaThresholds)
			if tc.thresholds != "" {
				meta[MetaThresholds] = tc.thresholds
			}
			var b bytes.Buffer
			if err := safetensors.Encode(&b, meta, ts); err != nil {
				t.Fatal(err)
			}
			_, err = Load(b.Bytes(), "bad")
			if !errors.Is(err, ErrMetadata) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Load: %v, want %v mentioning %q", err, ErrMetadata, tc.want)
			}
		})
	}
	m.Thresholds = []float64{0.5}
	if err := m.Encode(&bytes.Buffer{}, SaveOptions{}); err == nil {
		t.Error("Encode accepted 1 threshold for 3 labels")
	}
	m.Multi, m.Thresholds = false, []float64{0.5, 0.5, 0.5}
	if err := m.Encode(&bytes.Buffer{}, SaveOptions{}); err == nil {
		t.Error("Encode accepted thresholds on a single-label model")
	}
}
