package main

import (
	"encoding/json"
	"strings"
	"testing"

	"convtag/model"
	"convtag/model/token"
)

// TestWriteInfoText: the text layout of inspect shows the labels quoted,
// the row arithmetic, the fold type, the effective token cap, the training
// summary's fields and long metadata by size only.
func TestWriteInfoText(t *testing.T) {
	in := &model.Info{
		FormatVersion: 1, Labels: []string{"pier", "tide", "gull"}, Vocabulary: 7, Buckets: 5, Rows: 13,
		Dim: 6, Widths: []int{2, 3}, Filters: 4, Hidden: 3, Folded: true, FoldDType: "F16",
		Tokenizer: token.Settings{MaxTokens: 50}, CreatedBy: "convtag dev",
		Metadata: map[string]string{"note": "hello", "blob": strings.Repeat("x", 200), model.MetaChecksum: "sha256:00"},
		Training: json.RawMessage(`{"best":{"accuracy":0.875}}`),
	}
	var b strings.Builder
	if err := writeInfoText(&b, in, true); err != nil {
		t.Fatal(err)
	}
	text := b.String()
	for _, want := range []string{`"pier" "tide" "gull"`, "7 words + 5 rows for unseen words + padding = 13 rows", "yes, F16",
		"training best:", `"accuracy":0.875`, "max_tokens=50", `meta note:      "hello"`, "(200 bytes; see --json)", "created by:     convtag dev"} {
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q:\n%s", want, text)
		}
	}
	if strings.Contains(text, "meta checksum") {
		t.Errorf("the checksum key is shown twice:\n%s", text)
	}
	in.Tokenizer = token.Settings{}
	b.Reset()
	if err := writeInfoText(&b, in, true); err != nil || !strings.Contains(b.String(), "max_tokens=400") {
		t.Errorf("zero settings: want the default cap shown, got %v:\n%s", err, b.String())
	}
}
