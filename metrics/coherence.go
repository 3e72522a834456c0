package metrics

import (
	"fmt"
	"math"
)

// Coherence metrics take focused (delayed) channel data of one image point or
// a short axial kernel around it: ch[i][k] is element i at kernel sample k,
// complex IQ (real RF data may be passed with zero imaginary parts). All rows
// must have the same length; ragged input panics.

// CoherenceFactor returns the coherence factor over an axial kernel (Mallart
// & Fink, JASA 96(6), 1994; Hollman et al. 1999):
//
//	CF = sum_k |sum_i s_ik|^2 / (N sum_k sum_i |s_ik|^2)
//
// with N elements. It is 1 for identical channels, about 1/N for incoherent
// ones, and 2/3 in fully developed speckle at the transmit focus for a
// uniform aperture and large N (the mean of the triangular aperture
// autocorrelation). A kernel of one sample gives the per-pixel CF. Zero
// energy gives NaN.
func CoherenceFactor(ch [][]complex128) float64 {
	nk := checkChannels("CoherenceFactor", ch)
	var num, den float64
	for k := range nk {
		var s complex128
		for _, row := range ch {
			v := row[k]
			s += v
			den += real(v)*real(v) + imag(v)*imag(v)
		}
		num += real(s)*real(s) + imag(s)*imag(s)
	}
	if den == 0 {
		return math.NaN()
	}
	return num / (float64(len(ch)) * den)
}

// SpatialCoherence returns the normalized spatial coherence of the channels
// at element lag m, averaged over the N - m element pairs:
//
//	R(m) = 1/(N - m) sum_i Re{sum_k s_ik conj(s_(i+m)k)} / sqrt(sum_k |s_ik|^2 sum_k |s_(i+m)k|^2)
//
// (the estimator of short-lag spatial coherence, Lediju et al. 2011, and of
// lag-one coherence, Long et al. 2018; normalization as remembered). Pairs in
// which a channel has zero energy are skipped; NaN when no pair remains. It
// panics when m < 1.
func SpatialCoherence(ch [][]complex128, m int) float64 {
	if m < 1 {
		panic(fmt.Sprintf("metrics: SpatialCoherence: lag %d, must be at least 1", m))
	}
	checkChannels("SpatialCoherence", ch)
	var sum float64
	var pairs int
	for i := 0; i+m < len(ch); i++ {
		a, b := ch[i], ch[i+m]
		var ab, aa, bb float64
		for k := range a {
			x, y := a[k], b[k]
			ab += real(x)*real(y) + imag(x)*imag(y) // Re{x conj(y)}
			aa += real(x)*real(x) + imag(x)*imag(x)
			bb += real(y)*real(y) + imag(y)*imag(y)
		}
		if aa == 0 || bb == 0 {
			continue
		}
		sum += ab / math.Sqrt(aa*bb)
		pairs++
	}
	if pairs == 0 {
		return math.NaN()
	}
	return sum / float64(pairs)
}

// LagOneCoherence returns SpatialCoherence(ch, 1) (Long et al., IEEE TUFFC
// 65(10), 2018). For signals that are identical across channels plus
// incoherent channel noise it relates to the channel signal-to-noise
// amplitude ratio by SNR = sqrt(LOC / (1 - LOC)) (Long et al. 2018, from
// memory), which ChannelSNR evaluates.
func LagOneCoherence(ch [][]complex128) float64 { return SpatialCoherence(ch, 1) }

// ChannelSNR returns sqrt(loc / (1 - loc)), the channel signal-to-noise
// amplitude ratio implied by a lag-one coherence loc; NaN outside [0, 1).
func ChannelSNR(loc float64) float64 {
	if !(loc >= 0 && loc < 1) {
		return math.NaN()
	}
	return math.Sqrt(loc / (1 - loc))
}

// checkChannels panics on empty or ragged channel data and returns the
// kernel length.
func checkChannels(fn string, ch [][]complex128) int {
	if len(ch) == 0 {
		panic(fmt.Sprintf("metrics: %s: no channels", fn))
	}
	nk := len(ch[0])
	for i, row := range ch {
		if len(row) != nk {
			panic(fmt.Sprintf("metrics: %s: channel %d has %d samples, channel 0 has %d", fn, i, len(row), nk))
		}
	}
	return nk
}
