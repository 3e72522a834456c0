package dsp

import (
	"fmt"
	"math"
)

// Sign convention for both estimators below: a positive lag L means b lags a,
// that is b is a delayed copy of a, b[n] = a[n - L]; b's echo arrives L
// samples after a's. Lags are in samples.

// XCorrLag estimates the delay of b relative to a (Flax & O'Donnell 1988) from
// the normalized cross-correlation of complex (analytic or baseband) signals,
//
//	rho(L) = |c(L)| / sqrt(sum |a|^2 sum |b|^2),  c(L) = sum_n a[n] conj(b[n+L]),
//
// where c(L) sums over the samples where both signals exist and the energies
// run over whole signals, so 0 <= rho <= 1 (Cauchy-Schwarz) and maximizing rho
// maximizes |c|. If b[n] = a[n - D], then c(L) = sum a[n] conj(a[n + L - D])
// peaks at L = D: a positive lag means b is delayed relative to a.
//
// The integer lag with the largest rho over |L| <= maxLag (the first on ties)
// is refined to sub-sample precision by [ParabolicPeak] through rho at L-1, L,
// L+1; at the ends of the lag range, where the true peak may lie beyond the
// search, it is not refined. coef is the refined rho, clamped to [0, 1]. The
// signals may differ in length. All-zero input gives (0, 0).
//
// Two biases to keep in mind: the parabola pulls towards the nearest integer
// lag when rho's peak is narrow (a few samples; Céspedes et al. 1995), and
// for signals that fill the window (speckle) the shrinking overlap tapers
// |c(L)| by about 1 - |L|/N, which pulls the estimate towards zero lag. For
// sub-sample accuracy on narrowband data use [PhaseLag] around the integer
// estimate.
//
// The work is O(len(a) * (2 maxLag + 1)), done directly: for the short windows
// and few lags of neighbouring-channel delays that beats an FFT. It panics if
// maxLag < 0.
func XCorrLag(a, b []complex64, maxLag int) (lag float64, coef float64) {
	if maxLag < 0 {
		panic(fmt.Sprintf("dsp: XCorrLag: maxLag must be non-negative, got %d", maxLag))
	}
	ea, eb := energy(a), energy(b)
	if !(ea > 0 && eb > 0) || math.IsInf(ea*eb, 0) {
		return 0, 0
	}
	norm := 1 / math.Sqrt(ea*eb)
	// Lags with no overlap contribute nothing; leave them out.
	lo := max(-maxLag, -(len(a) - 1))
	hi := min(maxLag, len(b)-1)

	best, bestL := -1.0, 0
	var left, right float64
	prev := math.NaN()
	needRight := false
	for l := lo; l <= hi; l++ {
		rho := crossMag(a, b, l) * norm
		if needRight {
			right, needRight = rho, false
		}
		if rho > best {
			best, bestL, left, needRight = rho, l, prev, true
		}
		prev = rho
	}
	if bestL == lo || bestL == hi {
		return float64(bestL), min(best, 1)
	}
	d, v := ParabolicPeak(left, best, right)
	return float64(bestL) + d, min(max(v, 0), 1)
}

// crossMag returns |sum_n a[n] conj(b[n+l])| over the overlap, accumulated in
// float64.
func crossMag(a, b []complex64, l int) float64 {
	// Overlap: 0 <= n < len(a) and 0 <= n+l < len(b).
	n0 := max(0, -l)
	n1 := min(len(a), len(b)-l)
	if n1 <= n0 {
		return 0
	}
	as := a[n0:n1]
	bs := b[n0+l : n1+l]
	bs = bs[:len(as)]
	var re, im float64
	for i, av := range as {
		ar, ai := float64(real(av)), float64(imag(av))
		br, bi := float64(real(bs[i])), float64(imag(bs[i]))
		re += ar*br + ai*bi // a conj(b) = (ar br + ai bi) + j (ai br - ar bi)
		im += ai*br - ar*bi
	}
	return math.Hypot(re, im)
}

// energy returns sum |x|^2 in float64.
func energy(x []complex64) float64 {
	var e float64
	for _, v := range x {
		r, i := float64(real(v)), float64(imag(v))
		e += r*r + i*i
	}
	return e
}

// PhaseLag estimates the delay of b relative to a from the phase of their
// zero-lag cross product (Kasai et al. 1985), for analytic or baseband data
// centred on angular frequency omega (radians per sample; for RF sampled at
// fs with centre frequency f0, omega = 2 pi f0 / fs, and for IQ data the same
// RF centre frequency, since the delay rotates the phase at the carrier):
//
//	s    = sum_n a[n] conj(b[n])
//	lag  = angle(s) / omega          (= -angle(sum conj(a) b) / omega)
//	coef = |s| / sqrt(sum |a|^2 sum |b|^2)
//
// With the sign convention of [XCorrLag]: if a[n] = A(n) e^(j omega n) and
// b[n] = a[n - D], then a conj(b) ~ |A|^2 e^(j omega D), so angle(s) = omega D
// and lag = D > 0 when b is delayed. The phase wraps, so only
// |lag| < pi / omega (half a period) is unambiguous; use XCorrLag first for
// larger delays and align the signals. For a spectrum symmetric about omega
// the estimate is unbiased; otherwise omega should be the power-weighted mean
// frequency. All-zero input gives (0, 0).
//
// It panics if len(a) != len(b) or omega is zero or not finite.
func PhaseLag(a, b []complex64, omega float64) (lag float64, coef float64) {
	if len(a) != len(b) {
		panic(fmt.Sprintf("dsp: PhaseLag: lengths differ: %d and %d", len(a), len(b)))
	}
	if omega == 0 || math.IsNaN(omega) || math.IsInf(omega, 0) {
		panic(fmt.Sprintf("dsp: PhaseLag: omega must be non-zero and finite, got %g", omega))
	}
	b = b[:len(a)]
	var re, im, ea, eb float64
	for i, av := range a {
		ar, ai := float64(real(av)), float64(imag(av))
		br, bi := float64(real(b[i])), float64(imag(b[i]))
		re += ar*br + ai*bi
		im += ai*br - ar*bi
		ea += ar*ar + ai*ai
		eb += br*br + bi*bi
	}
	if !(ea > 0 && eb > 0) || math.IsInf(ea*eb, 0) {
		return 0, 0
	}
	return math.Atan2(im, re) / omega, min(math.Hypot(re, im)/math.Sqrt(ea*eb), 1)
}
