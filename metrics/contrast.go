package metrics

import (
	"math"
)

// Contrast metrics take linear envelope samples (never dB), for example from
// Samples. Variances are unbiased sample variances (divisor n - 1). Empty
// inputs, or single samples where a variance is needed, give NaN; non-finite
// samples propagate.

// ContrastDB returns the contrast of in against out in dB:
//
//	C = 20 log10(mean(in) / mean(out))
//
// Negative for a region darker than its background (an anechoic cyst).
func ContrastDB(in, out []float64) float64 {
	if len(in) == 0 || len(out) == 0 {
		return math.NaN()
	}
	return 20 * math.Log10(mean(in)/mean(out))
}

// CNR returns the contrast-to-noise ratio
//
//	CNR = |mu_i - mu_o| / sqrt(var_i + var_o)
//
// of linear envelope samples.
func CNR(in, out []float64) float64 {
	mi, vi := meanVar(in)
	mo, vo := meanVar(out)
	return math.Abs(mi-mo) / math.Sqrt(vi+vo)
}

// SpeckleSNR returns mean / std of linear envelope samples. Fully developed
// speckle has a Rayleigh envelope with SNR = sqrt(pi / (4 - pi)) = 1.913
// (Burckhardt 1978; Wagner et al. 1983); values above it suggest a coherent
// component or smoothing, values below it suggest noise or clutter.
func SpeckleSNR(v []float64) float64 {
	m, s2 := meanVar(v)
	return m / math.Sqrt(s2)
}

func mean(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// meanVar returns the mean and the unbiased variance, with a second pass
// about the mean so that a large mean does not swamp a small variance.
func meanVar(v []float64) (m, s2 float64) {
	if len(v) < 2 {
		return math.NaN(), math.NaN()
	}
	m = mean(v)
	var ss, sc float64
	for _, x := range v {
		d := x - m
		ss += d * d
		sc += d
	}
	n := float64(len(v))
	return m, (ss - sc*sc/n) / (n - 1)
}

// GCNR bins: Rice rule, clamped.
const (
	gcnrMinBins = 16
	gcnrMaxBins = 256
)

// GCNR returns the generalized contrast-to-noise ratio of two sets of linear
// envelope samples (Rodriguez-Molares et al., IEEE TUFFC 67(4), 2020):
//
//	gCNR = 1 - OVL,  OVL = sum_k min(h_in[k], h_out[k])
//
// where h_in and h_out are the histograms of in and out over common bins, each
// normalized to sum 1. gCNR is 0 for identical distributions and 1 for
// disjoint ones, whatever the contrast.
//
// Binning: equal-width bins spanning the pooled min..max, their number from
// the Rice rule, ceil(2 (n_in + n_out)^(1/3)), clamped to [16, 256]. The
// histogram estimate is biased upwards by sampling noise (two noisy
// histograms of one distribution never overlap fully) and downwards by coarse
// bins (which blur the crossing of the two densities). For Rayleigh samples
// of 20 000 values each, the square-root rule (200 bins) reads 0.045 for two
// draws of one distribution, the Rice rule (69 bins) 0.025, while both stay
// within 0.002 on average of the closed form for scale ratios 1.25 to 8; with
// 300 inside and 3000 outside samples the floor is 0.10 (Rice) against 0.15
// (square root). Small regions therefore have a positive gCNR floor even
// without contrast. Samples whose ranges do not overlap give exactly 1.
// GCNRBins takes an explicit bin count.
func GCNR(in, out []float64) float64 {
	nb := int(math.Ceil(2 * math.Cbrt(float64(len(in)+len(out)))))
	return GCNRBins(in, out, min(max(nb, gcnrMinBins), gcnrMaxBins))
}

// GCNRBins is GCNR with bins equal-width bins over the pooled range. It
// panics when bins < 1.
func GCNRBins(in, out []float64, bins int) float64 {
	if bins < 1 {
		panic("metrics: GCNRBins: bins must be at least 1")
	}
	if len(in) == 0 || len(out) == 0 {
		return math.NaN()
	}
	loI, hiI := minMax(in)
	loO, hiO := minMax(out)
	if math.IsNaN(loI+hiI+loO+hiO) || math.IsInf(loI+hiI+loO+hiO, 0) {
		return math.NaN()
	}
	if hiI < loO || hiO < loI {
		return 1
	}
	lo, hi := min(loI, loO), max(hiI, hiO)
	if lo == hi {
		return 0
	}
	ci := histogram(in, lo, hi, bins)
	co := histogram(out, lo, hi, bins)
	ni, no := float64(len(in)), float64(len(out))
	ovl := 0.0
	for k := range ci {
		ovl += min(float64(ci[k])/ni, float64(co[k])/no)
	}
	return max(0, 1-ovl)
}

func minMax(v []float64) (lo, hi float64) {
	lo, hi = v[0], v[0]
	for _, x := range v {
		if x < lo {
			lo = x
		}
		if x > hi {
			hi = x
		}
		if x != x {
			return math.NaN(), math.NaN()
		}
	}
	return lo, hi
}

// histogram counts v in bins equal bins over [lo, hi]; hi falls in the last.
func histogram(v []float64, lo, hi float64, bins int) []int {
	c := make([]int, bins)
	scale := float64(bins) / (hi - lo)
	last := bins - 1
	for _, x := range v {
		k := int((x - lo) * scale)
		if k > last {
			k = last
		}
		c[k]++
	}
	return c
}

// ContrastResult holds the contrast metrics of one region pair.
type ContrastResult struct {
	Name          string  `json:"name"`
	NIn           int     `json:"n_in"`  // pixels inside
	NOut          int     `json:"n_out"` // pixels outside
	ContrastDB    float64 `json:"contrast_db"`
	CNR           float64 `json:"cnr"`
	GCNR          float64 `json:"gcnr"`
	SpeckleSNRIn  float64 `json:"speckle_snr_in"`
	SpeckleSNROut float64 `json:"speckle_snr_out"`
}

// MeasurePair computes the contrast metrics of pair p on f (which must be
// valid, see Field.Validate).
func MeasurePair(f *Field, p RegionPair) ContrastResult {
	in, out := Samples(f, p.Inside), Samples(f, p.Outside)
	return ContrastResult{
		Name:          p.Name,
		NIn:           len(in),
		NOut:          len(out),
		ContrastDB:    ContrastDB(in, out),
		CNR:           CNR(in, out),
		GCNR:          GCNR(in, out),
		SpeckleSNRIn:  SpeckleSNR(in),
		SpeckleSNROut: SpeckleSNR(out),
	}
}
