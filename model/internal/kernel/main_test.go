package kernel_test

import (
	"os"
	"testing"

	"convtag/model/internal/kernel/kerneltest"
)

// TestMain runs the tests, then prints which kernel sets they compared
// with the plain-Go ones on this CPU and build (see kerneltest.Main).
func TestMain(m *testing.M) { os.Exit(kerneltest.Main(m, "model/internal/kernel")) }
