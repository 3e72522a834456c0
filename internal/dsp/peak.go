package dsp

import "math"

// ParabolicPeak fits the parabola p(d) = y1 + d (y2 - y0)/2 + d^2 (y0 - 2 y1 + y2)/2
// through (-1, y0), (0, y1), (1, y2) and returns its vertex offset
//
//	offset = (y0 - y2) / (2 (y0 - 2 y1 + y2))
//
// clamped to [-1, 1], and value = p(offset). When y1 is the largest of the
// three the offset lies in [-0.5, 0.5]; when y1 is the smallest the vertex is a
// minimum. A zero or non-finite curvature (three collinear points, NaN or
// infinite input) gives offset 0 and value y1.
//
// On a sampled correlation peak the parabola is biased towards the nearest
// sample by an amount that shrinks as the peak widens (Céspedes et al. 1995).
func ParabolicPeak(y0, y1, y2 float64) (offset, value float64) {
	curv := y0 - 2*y1 + y2
	if curv == 0 || math.IsNaN(curv) || math.IsInf(curv, 0) {
		return 0, y1
	}
	d := min(max(0.5*(y0-y2)/curv, -1), 1)
	return d, y1 + d*(0.5*(y2-y0)+0.5*d*curv)
}

// ArgMax returns the index of the largest value of y, the first on ties.
// NaN values are skipped; it returns -1 when y is empty or all NaN.
func ArgMax(y []float64) int {
	best := -1
	bv := math.Inf(-1)
	for i, v := range y {
		if v > bv || (best < 0 && v == bv) { // the second clause admits a leading -Inf
			best, bv = i, v
		}
	}
	return best
}

// RefinedMax returns the sub-sample position of the maximum of y, ArgMax plus
// the [ParabolicPeak] offset through its two neighbours, and the refined
// value. At the first and last sample, where a neighbour is missing, it
// returns the sample itself unrefined. It returns (-1, NaN) when y is empty or
// all NaN.
func RefinedMax(y []float64) (pos, value float64) {
	i := ArgMax(y)
	if i < 0 {
		return -1, math.NaN()
	}
	if i == 0 || i == len(y)-1 {
		return float64(i), y[i]
	}
	d, v := ParabolicPeak(y[i-1], y[i], y[i+1])
	return float64(i) + d, v
}
