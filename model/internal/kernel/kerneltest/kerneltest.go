// Package kerneltest is the test side of package kernel for the packages
// whose tests run its sets: the line that says which sets this CPU and
// build let them compare, and the CONVTAG_KERNELS check. Only tests import
// it.
package kerneltest

import (
	"fmt"
	"os"
	"slices"
	"strings"
	"testing"

	"convtag/model/internal/kernel"
)

// Main runs m's tests, then prints one line on stdout saying which kernel
// sets the tests of package pkg compared with the plain-Go ones on this
// CPU and build and which they could not, such as
//
//	model: kernels tested: avx2, f16c, generic; not on this CPU or build: avx512
//
// and returns the exit code for os.Exit. The go command shows the line with
// -v, -json, in local directory mode (go test in the package's directory)
// and when the package fails; for a package that passes in package list
// mode (go test ./...) it prints only the "ok" line and drops the binary's
// stdout and stderr alike. So a CPU that must exercise some sets names them
// in CONVTAG_KERNELS (comma-separated, e.g. avx512,avx2): one that is not
// on this CPU or build fails the package, and the line shows.
func Main(m *testing.M, pkg string) int {
	tested, missing := Sort(kernel.All, kernel.HWF16 != nil)
	return report(m.Run(), pkg, tested, missing, os.Getenv("CONVTAG_KERNELS"))
}

// Sort sorts the kernel sets into those on this CPU and build and those
// not: the vector sets by name, the hardware half-precision conversion by
// f16c, and generic, always there.
func Sort(all []*kernel.Set, f16c bool) (tested, missing []string) {
	add := func(name string, on bool) {
		if on {
			tested = append(tested, name)
		} else {
			missing = append(missing, name)
		}
	}
	for _, name := range []string{"avx512", "avx2"} {
		add(name, slices.ContainsFunc(all, func(k *kernel.Set) bool { return k.Name == name }))
	}
	add("f16c", f16c)
	return append(tested, "generic"), missing
}

func report(code int, pkg string, tested, missing []string, want string) int {
	not := "none"
	if len(missing) > 0 {
		not = strings.Join(missing, ", ")
	}
	fmt.Printf("%s: kernels tested: %s; not on this CPU or build: %s\n", pkg, strings.Join(tested, ", "), not)
	for _, w := range strings.Split(want, ",") {
		if w = strings.TrimSpace(w); w != "" && slices.Contains(missing, w) {
			fmt.Printf("%s: CONVTAG_KERNELS asks for %s, which is not on this CPU or build\n", pkg, w)
			code = max(code, 1)
		}
	}
	return code
}
