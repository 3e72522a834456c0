package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// FWHMToSigma converts a correlation length given as the full width at half
// maximum of a Gaussian autocorrelation into its standard-deviation parameter
// s, with rho(dx) = exp(-dx^2 / (2 s^2)): s = FWHM / (2 sqrt(2 ln 2)).
func FWHMToSigma(fwhm float64) float64 { return fwhm / (2 * math.Sqrt(2*math.Ln2)) }

// DrawScreen draws a near-field phase screen: one arrival-time error per
// position (m along the array), a zero-mean Gaussian random process with
// Gaussian autocorrelation rho(dx) = exp(-dx^2 / (2 s^2)), where the
// correlation length corrLen is the autocorrelation's full width at half
// maximum (2.355 s). White Gaussian noise on a fine grid is convolved with
// exp(-x^2 / s^2), whose autocorrelation is the wanted Gaussian, and sampled
// at the positions. The draw is then shifted to zero mean and scaled so its
// rms equals rms exactly.
func DrawScreen(rng *rand.Rand, pos []float64, rms, corrLen float64) ([]float64, error) {
	if len(pos) == 0 {
		return nil, fmt.Errorf("screen: no element positions")
	}
	if !(rms >= 0) || !(corrLen > 0) {
		return nil, fmt.Errorf("screen: rms must be non-negative and correlation length positive")
	}
	out := make([]float64, len(pos))
	if rms == 0 {
		return out, nil
	}
	s := FWHMToSigma(corrLen)
	lo, hi := pos[0], pos[0]
	minGap := math.Inf(1)
	for i, p := range pos {
		lo, hi = math.Min(lo, p), math.Max(hi, p)
		if i > 0 {
			minGap = math.Min(minGap, math.Abs(p-pos[i-1]))
		}
	}
	dx := s / 8
	if minGap > 0 && minGap/4 < dx {
		dx = minGap / 4
	}
	half := 4 * s
	n := int(math.Ceil((hi-lo+2*half)/dx)) + 1
	if n > 1<<22 {
		return nil, fmt.Errorf("screen: correlation length %g m is too small for the array span", corrLen)
	}
	white := make([]float64, n)
	for i := range white {
		white[i] = rng.NormFloat64()
	}
	kh := int(math.Ceil(half / dx))
	kern := make([]float64, 2*kh+1)
	for k := range kern {
		x := float64(k-kh) * dx
		kern[k] = math.Exp(-x * x / (s * s))
	}
	field := func(i int) float64 {
		v := 0.0
		for k, w := range kern {
			j := i + k - kh
			if j >= 0 && j < n {
				v += w * white[j]
			}
		}
		return v
	}
	x0 := lo - half
	for i, p := range pos {
		f := (p - x0) / dx
		k := int(f)
		a := f - float64(k)
		out[i] = (1-a)*field(k) + a*field(k+1)
	}
	mean := 0.0
	for _, v := range out {
		mean += v
	}
	mean /= float64(len(out))
	ss := 0.0
	for i := range out {
		out[i] -= mean
		ss += out[i] * out[i]
	}
	r := math.Sqrt(ss / float64(len(out)))
	if r == 0 {
		return out, nil
	}
	for i := range out {
		out[i] *= rms / r
	}
	return out, nil
}

// ScreenPositions returns the coordinate along the array used to draw a
// screen: x for flat arrays, arc length for convex arrays.
func ScreenPositions(x, z []float64) []float64 {
	out := make([]float64, len(x))
	for i := 1; i < len(x); i++ {
		out[i] = out[i-1] + math.Hypot(x[i]-x[i-1], z[i]-z[i-1])
	}
	if len(x) > 0 {
		mid := (out[0] + out[len(out)-1]) / 2
		for i := range out {
			out[i] -= mid
		}
	}
	return out
}
