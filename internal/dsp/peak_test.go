package dsp

import (
	"math"
	"testing"
)

// parabolaTol is float64 round-off on values of order 10.
const parabolaTol = 1e-12

func TestParabolicPeakExactOnParabolas(t *testing.T) {
	t.Parallel()
	// Closed form: sampling y(d) = c - k (d - d0)^2 at d = -1, 0, 1 and
	// fitting a parabola gives back the vertex d0 and the peak value c.
	for _, d0 := range []float64{-0.5, -0.31, 0, 0.123, 0.4999, 0.5} {
		for _, k := range []float64{0.05, 1, 7.5} {
			for _, c := range []float64{-3, 0, 10} {
				y := func(d float64) float64 { return c - k*(d-d0)*(d-d0) }
				off, val := ParabolicPeak(y(-1), y(0), y(1))
				if math.Abs(off-d0) > parabolaTol || math.Abs(val-c) > parabolaTol {
					t.Errorf("d0=%g k=%g c=%g: got (%.15g, %.15g)", d0, k, c, off, val)
				}
			}
		}
	}
	// An upward parabola's vertex is its minimum, returned all the same.
	off, val := ParabolicPeak(2.25, 0.25, 0.25) // (d - 0.5)^2 at d = -1, 0, 1
	if math.Abs(off-0.5) > parabolaTol || math.Abs(val-0) > parabolaTol {
		t.Errorf("minimum: got (%g, %g), want (0.5, 0)", off, val)
	}
}

func TestParabolicPeakDegenerate(t *testing.T) {
	t.Parallel()
	nan, inf := math.NaN(), math.Inf(1)
	cases := []struct {
		name           string
		y0, y1, y2     float64
		wantOff, wantV float64
	}{
		{"flat", 2, 2, 2, 0, 2},
		{"collinear", 1, 2, 3, 0, 2},
		{"NaN neighbour", nan, 1, 0, 0, 1},
		{"Inf neighbour", 0, 1, inf, 0, 1},
		// Vertex at d = 9.5 (curvature -0.1): clamped to 1, where the parabola
		// passes through y2.
		{"clamped right", 0, 1, 1.9, 1, 1.9},
		{"clamped left", 1.9, 1, 0, -1, 1.9},
	}
	for _, tc := range cases {
		off, v := ParabolicPeak(tc.y0, tc.y1, tc.y2)
		if math.Abs(off-tc.wantOff) > parabolaTol || math.Abs(v-tc.wantV) > parabolaTol {
			t.Errorf("%s: got (%g, %g), want (%g, %g)", tc.name, off, v, tc.wantOff, tc.wantV)
		}
	}
}

func TestArgMax(t *testing.T) {
	t.Parallel()
	nan, inf := math.NaN(), math.Inf(1)
	cases := []struct {
		y    []float64
		want int
	}{
		{nil, -1},
		{[]float64{}, -1},
		{[]float64{5}, 0},
		{[]float64{1, 3, 2}, 1},
		{[]float64{3, 1, 3}, 0}, // first on ties
		{[]float64{-2, -1, -1}, 1},
		{[]float64{nan, 1, 2, nan}, 2}, // NaN skipped
		{[]float64{nan, nan}, -1},
		{[]float64{-inf, -inf}, 0},
		{[]float64{1, inf, 2}, 1},
	}
	for _, tc := range cases {
		if got := ArgMax(tc.y); got != tc.want {
			t.Errorf("ArgMax(%v) = %d, want %d", tc.y, got, tc.want)
		}
	}
}

func TestRefinedMax(t *testing.T) {
	t.Parallel()
	// Closed form: samples of y = 4 - 0.3 (i - 6.27)^2 peak at 6.27 with value 4.
	y := make([]float64, 12)
	for i := range y {
		d := float64(i) - 6.27
		y[i] = 4 - 0.3*d*d
	}
	if pos, v := RefinedMax(y); math.Abs(pos-6.27) > parabolaTol || math.Abs(v-4) > parabolaTol {
		t.Errorf("RefinedMax = (%g, %g), want (6.27, 4)", pos, v)
	}
	// At the ends there is no neighbour: the sample itself, unrefined.
	if pos, v := RefinedMax([]float64{9, 3, 1}); pos != 0 || v != 9 {
		t.Errorf("peak at start: (%g, %g), want (0, 9)", pos, v)
	}
	if pos, v := RefinedMax([]float64{1, 3, 9}); pos != 2 || v != 9 {
		t.Errorf("peak at end: (%g, %g), want (2, 9)", pos, v)
	}
	if pos, v := RefinedMax(nil); pos != -1 || !math.IsNaN(v) {
		t.Errorf("empty: (%g, %g), want (-1, NaN)", pos, v)
	}
}
