package train

import (
	"os"
	"testing"

	"convtag/model/internal/kernel/kerneltest"
)

// TestMain runs the tests, then prints which kernel sets the training tests
// compared on this CPU and build (see kerneltest.Main).
func TestMain(m *testing.M) { os.Exit(kerneltest.Main(m, "model/train")) }
