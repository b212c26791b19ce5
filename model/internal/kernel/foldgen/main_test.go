package main

import (
	"bytes"
	"fmt"
	"os"
	"testing"
)

// TestUpToDate regenerates fold_amd64.s in memory and compares it with the
// committed file, so a hand edit of the file or a template change without
// go generate fails here (and in CI, which runs every package's tests).
func TestUpToDate(t *testing.T) {
	want, err := generate()
	if err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile("../fold_amd64.s")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		line := 1 + bytes.Count(got[:commonPrefix(got, want)], []byte("\n"))
		t.Fatalf("fold_amd64.s differs from foldgen's output from line %d on; run go generate ./model/internal/kernel", line)
	}
}

func commonPrefix(a, b []byte) int {
	n := 0
	for n < len(a) && n < len(b) && a[n] == b[n] {
		n++
	}
	return n
}

// TestVariants: each variant's registers stay inside the banks the file's
// header assigns (AVX-512 sums Z0-Z7, maxima Z8-Z15, winners Z16-Z23,
// halves Z26-Z29; AVX2 Y0-Y3, Y4-Y7, Y8-Y11, halves Y14), only the masked
// vectors 4-7 of an x8 kernel take K4-K7, and only AVX-512 has x8 kernels.
func TestVariants(t *testing.T) {
	type bank struct{ lo, hi int }
	banks := map[bool][4]bank{
		true:  {{0, 7}, {8, 15}, {16, 23}, {26, 29}},
		false: {{0, 3}, {4, 7}, {8, 11}, {14, 14}},
	}
	in := func(reg string, z bool, b bank) bool {
		var n int
		prefix := map[bool]string{true: "Z", false: "Y"}[z]
		_, err := fmt.Sscanf(reg, prefix+"%d", &n)
		return err == nil && b.lo <= n && n <= b.hi
	}
	seen := map[string]bool{}
	for _, v := range variants {
		if seen[v.Name()] {
			t.Errorf("%s twice", v.Name())
		}
		seen[v.Name()] = true
		if v.V == 8 && !v.Z {
			t.Errorf("%s: an x8 kernel needs AVX-512's mask registers", v.Name())
		}
		vs := v.Vecs()
		if len(vs) != v.V {
			t.Fatalf("%s: %d vectors, want %d", v.Name(), len(vs), v.V)
		}
		b := banks[v.Z]
		for i, x := range vs {
			if !in(x.Sum, v.Z, b[0]) || !in(x.Max, v.Z, b[1]) || !in(x.Win, v.Z, b[2]) || !in(x.Half, v.Z, b[3]) {
				t.Errorf("%s vector %d: registers %+v outside their banks", v.Name(), i, x)
			}
			if want := v.V == 8 && i >= 4; (x.Mask != "") != want || (want && x.Mask != fmt.Sprintf("K%d", i)) {
				t.Errorf("%s vector %d: mask %q", v.Name(), i, x.Mask)
			}
		}
	}
}
