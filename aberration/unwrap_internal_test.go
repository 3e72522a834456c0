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
