package sgns

import (
	"os"
	"testing"

	"convtag/model/internal/kernel/kerneltest"
)

// TestMain runs the tests, then prints which kernel sets this CPU and
// build have (see kerneltest.Main): training runs the active one, whose
// Dot and Axpy package kernel compares with the plain-Go ones.
func TestMain(m *testing.M) { os.Exit(kerneltest.Main(m, "model/sgns")) }
