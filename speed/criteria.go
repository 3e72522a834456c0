package speed

import (
	"fmt"
	"math"
	"strings"
)

// Criterion is a focus-quality measure of aperture-domain data; larger is
// better focused.
type Criterion int

// Focus criteria.
const (
	// CoherenceFactor is |sum_j A_j|^2 / (N sum_j |A_j|^2), pooled over the
	// region as a ratio of sums (Mallart & Fink 1994).
	CoherenceFactor Criterion = iota + 1
	// LagOneCoherence is the normalised correlation of neighbouring elements'
	// delayed signals, pooled over the region (Long et al. 2018).
	LagOneCoherence
	// ShortLagCoherence is the mean normalised correlation over lags 1..M,
	// M about a tenth of the active aperture (Lediju et al. 2011).
	ShortLagCoherence
	// Brightness is the mean beamformed intensity (Nock, Trahey & Smith 1989).
	Brightness
	// NormalizedVariance is var(I) / mean(I)^2 of the beamformed intensity,
	// an image-sharpness measure; it carries no information in fully
	// developed speckle, where it is 1 at any focus, and serves images with
	// structure.
	NormalizedVariance
	// TransmitCoherence is the coherence factor taken across the transmit
	// events instead of the receive elements: |sum_e I_e|^2 / (E sum_e |I_e|^2)
	// with I_e the receive-focused image of event e, pooled over the region
	// as a ratio of sums. The events' images line up in phase only at the
	// right speed, and, unlike the receive-element criteria, it carries no
	// tilt towards high speeds from the receive geometry when the transmit
	// focus is weak (compounded plane waves; docs/validation.md). It needs
	// three or more events.
	TransmitCoherence
)

var criterionNames = map[Criterion]string{
	CoherenceFactor:    "coherence-factor",
	LagOneCoherence:    "lag-one-coherence",
	ShortLagCoherence:  "short-lag-coherence",
	Brightness:         "brightness",
	NormalizedVariance: "normalized-variance",
	TransmitCoherence:  "transmit-coherence",
}

func (c Criterion) String() string {
	if s, ok := criterionNames[c]; ok {
		return s
	}
	return "unknown"
}

// Criteria lists every criterion.
func Criteria() []Criterion {
	return []Criterion{CoherenceFactor, LagOneCoherence, ShortLagCoherence, Brightness, NormalizedVariance, TransmitCoherence}
}

// ParseCriterion parses a criterion name.
func ParseCriterion(s string) (Criterion, error) {
	for c, n := range criterionNames {
		if n == s {
			return c, nil
		}
	}
	var names []string
	for _, c := range Criteria() {
		names = append(names, c.String())
	}
	return 0, fmt.Errorf("unknown criterion %q (have %s)", s, strings.Join(names, ", "))
}

// sums holds the additive statistics of one tile from which every criterion
// is a ratio, so that tiles can be pooled and resampled.
type sums struct {
	coh, inc   float64 // sum |sum A|^2, sum N sum |A|^2
	lagNum     []float64
	lagDen     []float64
	i1, i2, np float64 // sum I, sum I^2, pixel count
	txCoh      float64 // sum |sum_e I_e|^2
	txInc      float64 // sum E sum_e |I_e|^2
}

func newSums(maxLag int) sums {
	return sums{lagNum: make([]float64, maxLag+1), lagDen: make([]float64, maxLag+1)}
}

func (s *sums) add(o *sums) {
	s.coh += o.coh
	s.inc += o.inc
	for m := range s.lagNum {
		s.lagNum[m] += o.lagNum[m]
		s.lagDen[m] += o.lagDen[m]
	}
	s.i1 += o.i1
	s.i2 += o.i2
	s.np += o.np
	s.txCoh += o.txCoh
	s.txInc += o.txInc
}

func (s *sums) reset() {
	s.coh, s.inc, s.i1, s.i2, s.np, s.txCoh, s.txInc = 0, 0, 0, 0, 0, 0, 0
	clear(s.lagNum)
	clear(s.lagDen)
}

// accumulate adds one pixel's aperture data a (active elements only, in
// array order; inactive elements are zero) to the sums.
func (s *sums) accumulate(a []complex64, active []bool) {
	var sr, si, e float64
	n := 0
	for j, v := range a {
		if !active[j] {
			continue
		}
		re, im := float64(real(v)), float64(imag(v))
		sr += re
		si += im
		e += re*re + im*im
		n++
	}
	if n == 0 {
		return
	}
	I := sr*sr + si*si
	s.coh += I
	s.inc += float64(n) * e
	s.i1 += I
	s.i2 += I * I
	s.np++
	for m := 1; m < len(s.lagNum); m++ {
		var num, den float64
		for j := 0; j+m < len(a); j++ {
			if !active[j] || !active[j+m] {
				continue
			}
			x, y := a[j], a[j+m]
			xr, xi := float64(real(x)), float64(imag(x))
			yr, yi := float64(real(y)), float64(imag(y))
			num += xr*yr + xi*yi
			den += (xr*xr + xi*xi + yr*yr + yi*yi) / 2
		}
		s.lagNum[m] += num
		s.lagDen[m] += den
	}
}

// value returns the criterion of the pooled sums.
func (s *sums) value(c Criterion, maxLag int) float64 {
	switch c {
	case CoherenceFactor:
		if s.inc == 0 {
			return math.NaN()
		}
		return s.coh / s.inc
	case LagOneCoherence:
		if s.lagDen[1] == 0 {
			return math.NaN()
		}
		return s.lagNum[1] / s.lagDen[1]
	case ShortLagCoherence:
		v := 0.0
		for m := 1; m <= maxLag; m++ {
			if s.lagDen[m] == 0 {
				return math.NaN()
			}
			v += s.lagNum[m] / s.lagDen[m]
		}
		return v / float64(maxLag)
	case Brightness:
		if s.np == 0 {
			return math.NaN()
		}
		return s.i1 / s.np
	case NormalizedVariance:
		if s.np == 0 || s.i1 == 0 {
			return math.NaN()
		}
		m := s.i1 / s.np
		return (s.i2/s.np - m*m) / (m * m)
	case TransmitCoherence:
		if s.txInc == 0 {
			return math.NaN()
		}
		return s.txCoh / s.txInc
	}
	return math.NaN()
}
