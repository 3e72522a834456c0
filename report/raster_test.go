package report

import (
	"image"
	"math"
	"testing"
)

func TestResampleTaps(t *testing.T) {
	t.Parallel()
	// sumTol is float rounding over at most a few hundred weights.
	const sumTol = 1e-12
	for _, tc := range []struct{ n, m int }{{1, 1}, {1, 7}, {5, 5}, {5, 12}, {40, 413}, {413, 40}, {1000, 3}, {7, 1}} {
		taps := resampleTaps(tc.n, tc.m)
		if len(taps) != tc.m {
			t.Fatalf("n=%d m=%d: %d outputs", tc.n, tc.m, len(taps))
		}
		for j, tp := range taps {
			var s float64
			for _, k := range tp {
				if k.i < 0 || k.i >= tc.n || k.w < 0 {
					t.Fatalf("n=%d m=%d: output %d: bad tap %+v", tc.n, tc.m, j, k)
				}
				s += k.w
			}
			if math.Abs(s-1) > sumTol {
				t.Errorf("n=%d m=%d: output %d: weights sum to %g", tc.n, tc.m, j, s)
			}
		}
	}
}

func TestGrayRasterSameSize(t *testing.T) {
	t.Parallel()
	// At the source size every output pixel is its source pixel:
	// gray = 255 * (dB + 60) / 60, rounded (closed form of the mapping).
	db := []float64{0, -15, -30, -45, -60, -90, 10, math.NaN()}
	want := []uint8{255, 191, 128, 64, 0, 0, 255, 0}
	g := grayRaster(db, 4, 2, 4, 2, 60)
	if g.Bounds() != image.Rect(0, 0, 4, 2) {
		t.Fatalf("bounds %v", g.Bounds())
	}
	for i, w := range want {
		if got := g.GrayAt(i%4, i/4).Y; got != w {
			t.Errorf("pixel %d (%g dB): %d, want %d", i, db[i], got, w)
		}
	}
}
