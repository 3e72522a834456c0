package dsp

import (
	"math"
	"testing"
)

func TestFitQuadraticExact(t *testing.T) {
	t.Parallel()
	// An exact parabola is recovered (closed form: least squares on exact data).
	xs := []float64{1000, 1001, 1003, 1004.5, 1007}
	ys := make([]float64, len(xs))
	for i, x := range xs {
		ys[i] = 2 - 0.5*x + 0.003*x*x
	}
	c0, c1, c2, ok := FitQuadratic(xs, ys)
	const tol = 1e-6 // relative, float64 rounding on offsets near 1000
	if !ok || math.Abs(c2-0.003) > tol || math.Abs(c1+0.5) > 1e3*tol || math.Abs(c0-2) > 1e6*tol {
		t.Errorf("FitQuadratic = %g, %g, %g, %v; want 2, -0.5, 0.003", c0, c1, c2, ok)
	}
	if _, ok := Solve3([3][3]float64{{1, 2, 3}, {2, 4, 6}, {1, 1, 1}}, [3]float64{1, 2, 3}); ok {
		t.Error("Solve3 of a singular matrix: want ok false")
	}
}
