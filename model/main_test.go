package model

import (
	"fmt"
	"os"
	"slices"
	"strings"
	"testing"
)

// TestMain runs the tests, then prints one line on stdout saying which
// kernel sets the kernel tests compared with their plain-Go twins on this
// CPU and build and which they could not, such as
//
//	model: kernels tested: avx2, avx2-train, f16c, generic; not on this CPU or build: avx512, avx512-train
//
// The go command shows it with -v, -json, in local directory mode (go test
// in the package's directory) and when the package fails; for a package
// that passes in package list mode (go test ./...) it prints only the "ok"
// line and drops the binary's stdout and stderr alike. So a CPU that must
// exercise some kernels names them in CONVTAG_KERNELS (comma-separated,
// e.g. avx512,avx2): one that is not on this CPU or build fails the
// package, and the line shows.
func TestMain(m *testing.M) {
	// Read before m.Run: tests switch the training kernels off and on.
	tested, missing := modelKernels(allKernels, trainAVX2, trainAVX512, hwF16 != nil)
	os.Exit(kernelReport(m.Run(), "model", tested, missing))
}

// kernelReport prints the kernel line of package pkg and returns the exit
// code: code, or 1 if CONVTAG_KERNELS names a kernel set in missing.
func kernelReport(code int, pkg string, tested, missing []string) int {
	not := "none"
	if len(missing) > 0 {
		not = strings.Join(missing, ", ")
	}
	fmt.Printf("%s: kernels tested: %s; not on this CPU or build: %s\n", pkg, strings.Join(tested, ", "), not)
	for _, want := range strings.Split(os.Getenv("CONVTAG_KERNELS"), ",") {
		if want = strings.TrimSpace(want); want != "" && slices.Contains(missing, want) {
			fmt.Printf("%s: CONVTAG_KERNELS asks for %s, which is not on this CPU or build\n", pkg, want)
			code = max(code, 1)
		}
	}
	return code
}

// modelKernels sorts the kernel sets into those on this CPU and build and
// those not: the forward-pass sets in all by name, the training kernels
// by their flags, F16C conversion by f16c.
func modelKernels(all []*kernels, trainAVX2, trainAVX512, f16c bool) (tested, missing []string) {
	add := func(name string, on bool) {
		if on {
			tested = append(tested, name)
		} else {
			missing = append(missing, name)
		}
	}
	for _, name := range []string{"avx512", "avx2"} {
		add(name, slices.ContainsFunc(all, func(k *kernels) bool { return k.name == name }))
	}
	add("avx512-train", trainAVX512)
	add("avx2-train", trainAVX2)
	add("f16c", f16c)
	return append(tested, "generic"), missing
}

// TestModelKernels: every set is listed once, as tested or missing, by
// what the CPU offers.
func TestModelKernels(t *testing.T) {
	generic := &kernels{name: "generic"}
	for _, c := range []struct {
		all                     []*kernels
		avx2, avx512, f16c      bool
		wantTested, wantMissing []string
	}{
		{[]*kernels{generic}, false, false, false, []string{"generic"}, []string{"avx512", "avx2", "avx512-train", "avx2-train", "f16c"}},
		{[]*kernels{generic, {name: "avx2"}}, true, false, true, []string{"avx2", "avx2-train", "f16c", "generic"}, []string{"avx512", "avx512-train"}},
		{[]*kernels{generic, {name: "avx2"}, {name: "avx512"}}, true, true, true, []string{"avx512", "avx2", "avx512-train", "avx2-train", "f16c", "generic"}, nil},
	} {
		tested, missing := modelKernels(c.all, c.avx2, c.avx512, c.f16c)
		if !slices.Equal(tested, c.wantTested) || !slices.Equal(missing, c.wantMissing) {
			t.Errorf("%d kernel sets, avx2 %v avx512 %v f16c %v: tested %q missing %q, want %q and %q",
				len(c.all), c.avx2, c.avx512, c.f16c, tested, missing, c.wantTested, c.wantMissing)
		}
	}
}
