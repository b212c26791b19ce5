//go:build !unix

package sgns

import "math"

func cpuSeconds() float64 { return math.NaN() }
