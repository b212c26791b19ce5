package uci

import (
	"errors"
	"os"
	"testing"
)

// TestFetch fetches the data set (npm) and checks its published shape: 3 x
// 1,000 sentences, half positive in each source (Kotzias et al. 2015).
func TestFetch(t *testing.T) {
	dir, err := CacheDir()
	if err != nil {
		t.Fatal(err)
	}
	s, err := Fetch(dir)
	if errors.Is(err, ErrNoNpm) && os.Getenv("CI") != "true" {
		t.Skip(err)
	}
	if err != nil {
		t.Fatal(err)
	}
	pos := map[string]int{}
	n := map[string]int{}
	for _, x := range s {
		n[x.Source]++
		if x.Label == "positive" {
			pos[x.Source]++
		}
	}
	for _, src := range Sources {
		if n[src] != 1000 || pos[src] != 500 {
			t.Errorf("%s: %d sentences, %d positive; want 1000, 500", src, n[src], pos[src])
		}
	}
}
