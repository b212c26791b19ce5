package model

import (
	"errors"
	"strings"
	"testing"

	"convtag/model/safetensors"
	"convtag/model/token"
)

// TestUnexpectedTensorStable: with several unexpected tensors the error
// names the same one, the first by name, and counts the others, on every
// run (it named whichever map iteration gave first).
func TestUnexpectedTensorStable(t *testing.T) {
	m := stModel(t, 10, 0, "")
	raw := stBuild(t, m, func(_ map[string]string, ts []Tensor) []Tensor {
		for _, n := range []string{"zz.extra", "mm.extra", "aa.extra"} {
			ts = append(ts, Tensor{Name: n, DType: "U8", Shape: []int{1}, Data: []byte{7}})
		}
		return ts
	})
	for range 20 {
		_, err := Load(raw, "ferry.safetensors")
		want := `model: ferry.safetensors: tensor "aa.extra": unexpected tensor: not part of this model's config (and 2 more unexpected tensors)`
		if !errors.Is(err, ErrUnexpectedTensor) || err.Error() != want {
			t.Fatalf("Load: %v\nwant %s", err, want)
		}
	}
}

// TestErrorsCapQuotedValues: a value from the file that an error quotes is
// cut after quoteCap bytes, so a crafted megabyte name gives a short line.
func TestErrorsCapQuotedValues(t *testing.T) {
	long := strings.Repeat("lighthouse-", 100_000) // 1.1 MB
	m := stModel(t, 10, 0, "")
	for _, c := range []struct {
		name string
		raw  []byte
		err  error
	}{
		{"duplicate label", stBuild(t, m, func(meta map[string]string, ts []Tensor) []Tensor {
			meta[MetaLabels] = `["` + long + `","` + long + `"]`
			return ts
		}), ErrMetadata},
		{"format", stBuild(t, m, func(meta map[string]string, ts []Tensor) []Tensor {
			meta[MetaFormat] = long
			return ts
		}), ErrNotModel},
		{"version", stBuild(t, m, func(meta map[string]string, ts []Tensor) []Tensor {
			meta[MetaFormatVersion] = long
			return ts
		}), ErrVersion},
		{"unexpected tensor name", stBuild(t, m, func(_ map[string]string, ts []Tensor) []Tensor {
			return append(ts, Tensor{Name: long, DType: "U8", Shape: []int{1}, Data: []byte{1}})
		}), ErrUnexpectedTensor},
		{"dtype", stRaw(`{"t":{"dtype":"`+long+`","shape":[0],"data_offsets":[0,0]}}`, nil), safetensors.ErrDType},
		{"unknown field", stRaw(`{"t":{"`+long+`":1}}`, nil), safetensors.ErrHeader},
		{"string token", stRaw(`{"t":"`+long+`"}`, nil), safetensors.ErrHeader},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Load(c.raw, "ferry.safetensors")
			if !errors.Is(err, c.err) {
				t.Fatalf("Load: %.300v, want %v", err, c.err)
			}
			if msg := err.Error(); len(msg) >= 1000 || !strings.Contains(msg, `"…`) {
				t.Errorf("message of %d bytes: %.300s", len(msg), msg)
			}
		})
	}
	if _, err := New(Config{Dim: 4, Widths: []int{3}, Filters: 2, Buckets: 4}, token.Settings{}, []string{long, long}, nil, 1); err == nil || len(err.Error()) >= 1000 {
		t.Errorf("New with a duplicate long label: %.300v", err)
	}
}
