//go:build !unix

package recon_test

import "math"

// cpuSeconds is not available here; the per-CPU-second metric reads NaN.
func cpuSeconds() float64 { return math.NaN() }
