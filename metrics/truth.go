package metrics

import (
	"fmt"
	"math"
)

// SpeedError returns estimate - truth (m/s when both are speeds).
func SpeedError(estimate, truth float64) float64 { return estimate - truth }

// RMS returns the root mean square of v, NaN when v is empty.
func RMS(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s / float64(len(v)))
}

// Detrend removes the mean and the least-squares linear trend in x from p:
//
//	res[i] = p[i] - mean - slope (x[i] - mean(x)),
//	mean = mean(p),  slope = sum (x - mean(x)) (p - mean(p)) / sum (x - mean(x))^2
//
// For arrival-time profiles (s) at element positions (m) the slope is in s per
// m; a constant delay and a tilt do not change the focus (they shift and steer
// the image), so aberration profiles are compared after removing them. With
// fewer than two distinct positions the slope is 0. It panics when len(p) !=
// len(x); empty input gives an empty residual and NaN mean.
func Detrend(p, x []float64) (res []float64, mean, slope float64) {
	if len(p) != len(x) {
		panic(fmt.Sprintf("metrics: Detrend: %d values but %d positions", len(p), len(x)))
	}
	res = make([]float64, len(p))
	if len(p) == 0 {
		return res, math.NaN(), math.NaN()
	}
	mean, mx := 0.0, 0.0
	for i := range p {
		mean += p[i]
		mx += x[i]
	}
	n := float64(len(p))
	mean /= n
	mx /= n
	var sxx, sxp float64
	for i := range p {
		dx := x[i] - mx
		sxx += dx * dx
		sxp += dx * (p[i] - mean)
	}
	if sxx > 0 {
		slope = sxp / sxx
	}
	for i := range p {
		res[i] = p[i] - mean - slope*(x[i]-mx)
	}
	return res, mean, slope
}

// ProfileError compares two per-element arrival-time profiles (s) at element
// positions x (m) after removing the mean and the least-squares linear trend
// from each (see Detrend). It returns the rms of the difference of the
// residuals (s) and their Pearson correlation. The correlation is NaN when a
// residual is identically zero (a profile that is purely a tilt). It panics
// when the three lengths differ; empty input gives NaN.
func ProfileError(est, truth, x []float64) (rms, corr float64) {
	if len(est) != len(truth) || len(est) != len(x) {
		panic(fmt.Sprintf("metrics: ProfileError: lengths differ: est %d, truth %d, x %d", len(est), len(truth), len(x)))
	}
	if len(est) == 0 {
		return math.NaN(), math.NaN()
	}
	re, _, _ := Detrend(est, x)
	rt, _, _ := Detrend(truth, x)
	var sd, see, stt, set float64
	for i := range re {
		d := re[i] - rt[i]
		sd += d * d
		see += re[i] * re[i]
		stt += rt[i] * rt[i]
		set += re[i] * rt[i]
	}
	rms = math.Sqrt(sd / float64(len(re)))
	if see == 0 || stt == 0 {
		return rms, math.NaN()
	}
	// Both residuals have zero mean, so no further centring is needed.
	return rms, set / math.Sqrt(see*stt)
}
