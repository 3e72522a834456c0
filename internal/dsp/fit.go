package dsp

import "math"

// Solve3 solves the 3 x 3 linear system m x = b by Cramer's rule; ok is
// false when m is singular or not finite.
func Solve3(m [3][3]float64, b [3]float64) (x [3]float64, ok bool) {
	d := det3(m)
	if d == 0 || math.IsNaN(d) || math.IsInf(d, 0) {
		return x, false
	}
	for k := range 3 {
		mk := m
		for r := range 3 {
			mk[r][k] = b[r]
		}
		x[k] = det3(mk) / d
	}
	return x, true
}

func det3(m [3][3]float64) float64 {
	return m[0][0]*(m[1][1]*m[2][2]-m[1][2]*m[2][1]) -
		m[0][1]*(m[1][0]*m[2][2]-m[1][2]*m[2][0]) +
		m[0][2]*(m[1][0]*m[2][1]-m[1][1]*m[2][0])
}

// FitQuadratic fits y = c0 + c1 x + c2 x^2 by least squares. The abscissae
// are centred before forming the normal equations, which keeps them well
// conditioned; ok is false with fewer than three distinct points.
func FitQuadratic(xs, ys []float64) (c0, c1, c2 float64, ok bool) {
	n := float64(len(xs))
	if len(xs) < 3 || len(ys) != len(xs) {
		return 0, 0, 0, false
	}
	mx := 0.0
	for _, x := range xs {
		mx += x
	}
	mx /= n
	var s [5]float64
	var t [3]float64
	for i, x0 := range xs {
		x := x0 - mx
		p := 1.0
		for k := range 5 {
			s[k] += p
			if k < 3 {
				t[k] += p * ys[i]
			}
			p *= x
		}
	}
	m := [3][3]float64{{s[0], s[1], s[2]}, {s[1], s[2], s[3]}, {s[2], s[3], s[4]}}
	a, ok := Solve3(m, t)
	if !ok {
		return 0, 0, 0, false
	}
	// back from centred x: y = A + B (x - mx) + C (x - mx)^2
	return a[0] - a[1]*mx + a[2]*mx*mx, a[1] - 2*a[2]*mx, a[2], true
}
