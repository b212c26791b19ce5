package model

import (
	"bytes"
	"errors"
	"fmt"
	"strings"
	"testing"

	"convtag/model/token"
)

// stEntries is a header of n entries: zero-byte U8 tensors, or metadata
// keys when meta is set.
func stEntries(n int, meta bool) []byte {
	var h bytes.Buffer
	h.WriteByte('{')
	if meta {
		h.WriteString(`"__metadata__":{`)
	}
	for i := range n {
		if i > 0 {
			h.WriteByte(',')
		}
		if meta {
			fmt.Fprintf(&h, `"k%d":"v"`, i)
		} else {
			fmt.Fprintf(&h, `"t%d":{"dtype":"U8","shape":[0],"data_offsets":[0,0]}`, i)
		}
	}
	if meta {
		h.WriteByte('}')
	}
	h.WriteByte('}')
	return stRaw(h.String(), nil)
}

// TestHeaderEntryCap: a header may list at most MaxEntries tensors
// and MaxEntries metadata keys; a million entries are refused with the
// cap's error (not a parse of the whole header).
func TestHeaderEntryCap(t *testing.T) {
	for _, c := range []struct {
		name string
		n    int
		meta bool
		ok   bool
	}{
		{"tensors at the cap", MaxEntries, false, true},
		{"tensors one over", MaxEntries + 1, false, false},
		{"a million tensors", 1_000_000, false, false},
		{"metadata at the cap", MaxEntries, true, true},
		{"metadata one over", MaxEntries + 1, true, false},
		{"a million metadata keys", 1_000_000, true, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			meta, ts, err := ParseContainer(stEntries(c.n, c.meta))
			if c.ok {
				if err != nil || len(ts)+len(meta) != c.n {
					t.Fatalf("%d entries: %d tensors, %d keys, %v", c.n, len(ts), len(meta), err)
				}
				return
			}
			var fe *FormatError
			if !errors.Is(err, ErrEntries) || !errors.As(err, &fe) || !strings.Contains(err.Error(), fmt.Sprint(MaxEntries)) {
				t.Fatalf("%d entries: %v, want ErrEntries naming the cap", c.n, err)
			}
		})
	}
}

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
		{"dtype", stRaw(`{"t":{"dtype":"`+long+`","shape":[0],"data_offsets":[0,0]}}`, nil), ErrDType},
		{"unknown field", stRaw(`{"t":{"`+long+`":1}}`, nil), ErrHeader},
		{"string token", stRaw(`{"t":"`+long+`"}`, nil), ErrHeader},
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
