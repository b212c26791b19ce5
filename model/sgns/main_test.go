package sgns

import (
	"fmt"
	"os"
	"slices"
	"strings"
	"testing"
)

// TestMain runs the tests, then prints one line on stdout saying whether
// the AVX2 kernels were compared with their plain-Go twins (TestKernels
// skips without AVX2+FMA). As in package model (its main_test.go says
// when the go command shows the line), CONVTAG_KERNELS=avx2 makes a CPU
// or build without them fail the package.
func TestMain(m *testing.M) {
	tested, missing := []string{"generic"}, []string(nil)
	if useAVX2 {
		tested = []string{"avx2", "generic"}
	} else {
		missing = []string{"avx2"}
	}
	code := m.Run()
	not := "none"
	if len(missing) > 0 {
		not = strings.Join(missing, ", ")
	}
	fmt.Printf("model/sgns: kernels tested: %s; not on this CPU or build: %s\n", strings.Join(tested, ", "), not)
	for _, want := range strings.Split(os.Getenv("CONVTAG_KERNELS"), ",") {
		if want = strings.TrimSpace(want); want != "" && slices.Contains(missing, want) {
			fmt.Printf("model/sgns: CONVTAG_KERNELS asks for %s, which is not on this CPU or build\n", want)
			code = max(code, 1)
		}
	}
	os.Exit(code)
}
