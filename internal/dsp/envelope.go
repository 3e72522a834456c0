package dsp

import (
	"fmt"
	"math"
)

// Envelope writes the magnitude |x[i]| of an analytic or IQ signal into dst
// (allocated if nil) and returns it. The magnitude is computed in float64, so
// it neither overflows nor underflows for any finite complex64. It panics if a
// non-nil dst has a different length from x.
func Envelope(dst []float32, x []complex64) []float32 {
	if dst == nil {
		dst = make([]float32, len(x))
	} else if len(dst) != len(x) {
		panic(fmt.Sprintf("dsp: Envelope: destination length %d, input length %d", len(dst), len(x)))
	}
	dst = dst[:len(x)]
	for i, v := range x {
		r, im := float64(real(v)), float64(imag(v))
		dst[i] = float32(math.Sqrt(r*r + im*im))
	}
	return dst
}

// LogCompress writes the B-mode level
//
//	L = 20 log10(env / ref)  dB, clipped to [-dynamicRangeDB, 0]
//
// into dst (allocated if nil) and returns it. ref <= 0 means "the largest
// value of env". Zero envelope (and an all-zero env) maps to -dynamicRangeDB;
// NaN propagates. dst may be env itself. It panics if dynamicRangeDB is not
// positive and finite, or a non-nil dst has a different length from env.
func LogCompress(dst []float32, env []float32, ref float32, dynamicRangeDB float32) []float32 {
	if !(dynamicRangeDB > 0) || math.IsInf(float64(dynamicRangeDB), 0) {
		panic(fmt.Sprintf("dsp: LogCompress: dynamic range must be positive and finite, got %g", dynamicRangeDB))
	}
	if dst == nil {
		dst = make([]float32, len(env))
	} else if len(dst) != len(env) {
		panic(fmt.Sprintf("dsp: LogCompress: destination length %d, input length %d", len(dst), len(env)))
	}
	if ref <= 0 {
		ref = 0
		for _, v := range env {
			if v > ref { // skips NaN, which the builtin max would return
				ref = v
			}
		}
	}
	dst = dst[:len(env)]
	dr := float64(dynamicRangeDB)
	if ref == 0 { // all-zero (or all-NaN) envelope: nothing above the floor
		for i, v := range env {
			dst[i] = float32(-dr)
			if v != v {
				dst[i] = v
			}
		}
		return dst
	}
	// Below floor the level is clipped anyway, so skip the logarithm there.
	r := float64(ref)
	floor := r * math.Pow(10, -dr/20)
	scale := 1 / r
	for i, v := range env {
		e := float64(v)
		switch {
		case e <= floor:
			dst[i] = float32(-dr)
		case e >= r:
			dst[i] = 0
		default: // includes NaN, which propagates
			dst[i] = float32(max(20*math.Log10(e*scale), -dr))
		}
	}
	return dst
}
