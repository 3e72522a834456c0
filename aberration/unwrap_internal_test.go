package aberration

import (
	"math"
	"testing"
)

// TestUnwrapAlong: delays wrapped into one period come back to the smooth
// profile they were taken from (up to whole periods common to all), across
// elements that were not seen.
func TestUnwrapAlong(t *testing.T) {
	t.Parallel()
	const period = 200e-9 // 5 MHz
	n := 128
	truth := make([]float64, n)
	d := make([]float64, n)
	seen := make([]bool, n)
	for j := range n {
		// peaks of +/-180 ns, far beyond half a period, changing by at
		// most about 9 ns from element to element
		truth[j] = 180e-9 * math.Sin(2*math.Pi*float64(j)/64)
		d[j] = truth[j] - period*math.Round(truth[j]/period) // wrapped into [-T/2, T/2]
		seen[j] = j%17 != 5                                  // a few elements not seen
		if !seen[j] {
			d[j] = math.NaN()
		}
	}
	unwrapAlong(d, seen, period)
	var off float64
	first := true
	for j := range n {
		if !seen[j] {
			if !math.IsNaN(d[j]) {
				t.Fatalf("element %d was not seen but got %g", j, d[j])
			}
			continue
		}
		if first {
			off, first = d[j]-truth[j], false
		}
		if e := d[j] - truth[j] - off; math.Abs(e) > 1e-15 {
			t.Fatalf("element %d: unwrapped %.3f ns, truth %.3f ns (offset %.3f ns)", j, d[j]*1e9, truth[j]*1e9, off*1e9)
		}
	}
	if k := off / period; math.Abs(k-math.Round(k)) > 1e-9 {
		t.Errorf("common offset %.3f ns is not a whole number of periods", off*1e9)
	}
}

// TestUnslip: a smooth profile plus a steering taken modulo a period (the
// slipped state an iteration can settle in, with a jump of about a period
// between two neighbours) comes back to the smooth profile with the
// starting profile's mean and trend; a slip-free profile is left alone.
func TestUnslip(t *testing.T) {
	t.Parallel()
	const period = 200e-9 // 5 MHz
	n := 128
	x := make([]float64, n)
	screen := make([]float64, n)
	initial := make([]float64, n)
	for j := range n {
		x[j] = (float64(j) - 63.5) * 0.3e-3
		screen[j] = 60e-9 * math.Sin(2*math.Pi*float64(j)/40)
		initial[j] = 5e-9 + 0.2e-6*x[j] // mean 5 ns, trend 0.2 ns/mm
	}
	screen, _, _ = detrend(screen, x, nil)
	prof := make([]float64, n)
	for j := range n {
		// a ramp of 2 ns per element wrapped into one period: jumps of
		// -200 ns where it crosses half a period
		r := 2e-9 * float64(j)
		r -= period * math.Round(r/period)
		prof[j] = initial[j] + screen[j] + r
	}
	if !unslip(prof, initial, x, period) {
		t.Fatal("unslip found no slip")
	}
	for j := range n {
		if e := prof[j] - initial[j] - screen[j]; math.Abs(e) > 1e-15 {
			t.Fatalf("element %d: %.3f ns from the screen plus the initial profile", j, e*1e9)
		}
	}
	again := append([]float64(nil), prof...)
	if unslip(again, initial, x, period) {
		t.Error("unslip changed a slip-free profile")
	}
	for j := range n {
		if again[j] != prof[j] {
			t.Fatalf("element %d changed", j)
		}
	}
}
