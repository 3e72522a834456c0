//go:build !unix

package aberration_test

import "math"

// cpuSeconds is not available here; CPU-time figures read NaN.
func cpuSeconds() float64 { return math.NaN() }
