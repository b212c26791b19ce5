package kerneltest

import (
	"slices"
	"testing"

	"convtag/model/internal/kernel"
)

// TestSort: every set is listed once, as tested or missing, by what the
// CPU offers.
func TestSort(t *testing.T) {
	generic := &kernel.Set{Name: "generic"}
	for _, c := range []struct {
		all                     []*kernel.Set
		f16c                    bool
		wantTested, wantMissing []string
	}{
		{[]*kernel.Set{generic}, false, []string{"generic"}, []string{"avx512", "avx2", "f16c"}},
		{[]*kernel.Set{generic, {Name: "avx2"}}, true, []string{"avx2", "f16c", "generic"}, []string{"avx512"}},
		{[]*kernel.Set{generic, {Name: "avx2"}, {Name: "avx512"}}, true, []string{"avx512", "avx2", "f16c", "generic"}, nil},
	} {
		tested, missing := Sort(c.all, c.f16c)
		if !slices.Equal(tested, c.wantTested) || !slices.Equal(missing, c.wantMissing) {
			t.Errorf("%d kernel sets, f16c %v: tested %q missing %q, want %q and %q",
				len(c.all), c.f16c, tested, missing, c.wantTested, c.wantMissing)
		}
	}
}

// TestReport: a set CONVTAG_KERNELS asks for that is missing fails the
// package; one that is there, or an empty list, keeps its code.
func TestReport(t *testing.T) {
	for _, c := range []struct {
		code    int
		missing []string
		want    string
		exit    int
	}{
		{0, nil, "", 0},
		{0, []string{"avx512"}, "avx2", 0},
		{0, []string{"avx512"}, "avx2, avx512", 1},
		{2, []string{"avx512"}, "avx512", 2},
		{0, []string{"avx512"}, " , ", 0},
	} {
		if got := report(c.code, "test", []string{"generic"}, c.missing, c.want); got != c.exit {
			t.Errorf("code %d, missing %q, CONVTAG_KERNELS=%q: exit %d, want %d", c.code, c.missing, c.want, got, c.exit)
		}
	}
}
