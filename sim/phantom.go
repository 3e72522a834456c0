package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"celerity/acq"
)

// Scatterer is a point reflector with a signed amplitude.
type Scatterer struct {
	X, Z float64 // m
	Amp  float64
}

// Region is an axis-aligned rectangle in the image plane, m.
type Region struct{ X0, X1, Z0, Z1 float64 }

// Area returns the region's area in m^2.
func (r Region) Area() float64 { return (r.X1 - r.X0) * (r.Z1 - r.Z0) }

// ResolutionCell returns the lateral and axial sizes (m) of the resolution
// cell used to count scatterers: laterally one wavelength (the -6 dB width
// 0.886 lambda F# of a two-way focused aperture at F# near 1), axially the -6 dB
// pulse-echo envelope length c * 4 ln2 / (pi B f0) / 2. Channel data and
// images with a coarse point-spread function gather many cells and show fully
// developed speckle (envelope mean/std 1.91) at 10 per cell; an image whose
// point-spread function is about one such cell (synthetic aperture at a low
// F-number) needs several tens per cell for the same statistics, because the
// scatterer amplitudes, not only their phases, then vary from cell to cell.
func ResolutionCell(p Pulse, c float64) (lateral, axial float64) {
	return c / p.CenterHz, c * p.EnvelopeWidth() / 2
}

// MaxScatterers bounds the size of a generated phantom.
const MaxScatterers = 20_000_000

// Speckle draws diffuse scatterers uniformly in r with density per
// resolution cell of area cellArea and zero-mean unit-variance Gaussian
// amplitudes.
func Speckle(rng *rand.Rand, r Region, density, cellArea float64) ([]Scatterer, error) {
	if !(r.X1 > r.X0 && r.Z1 > r.Z0) {
		return nil, fmt.Errorf("speckle region is empty")
	}
	if !(density > 0) || !(cellArea > 0) {
		return nil, fmt.Errorf("speckle density and cell area must be positive")
	}
	nf := math.Round(density * r.Area() / cellArea)
	if nf > MaxScatterers {
		return nil, fmt.Errorf("speckle needs %.0f scatterers, over the limit of %d: reduce the region or the density", nf, MaxScatterers)
	}
	n := int(nf)
	out := make([]Scatterer, n)
	for i := range out {
		out[i] = Scatterer{
			X:   r.X0 + (r.X1-r.X0)*rng.Float64(),
			Z:   r.Z0 + (r.Z1-r.Z0)*rng.Float64(),
			Amp: rng.NormFloat64(),
		}
	}
	return out, nil
}

// ApplyInclusions scales the amplitude of every scatterer inside an inclusion
// by 10^(contrast/20) and drops those scaled below 1e-5 (anechoic).
func ApplyInclusions(s []Scatterer, inc []acq.Inclusion) []Scatterer {
	out := s[:0]
	for _, p := range s {
		keep := true
		for _, in := range inc {
			dx, dz := p.X-in.CenterM[0], p.Z-in.CenterM[1]
			if dx*dx+dz*dz <= in.RadiusM*in.RadiusM {
				g := math.Pow(10, in.ContrastDB/20)
				if g < 1e-5 {
					keep = false
					break
				}
				p.Amp *= g
			}
		}
		if keep {
			out = append(out, p)
		}
	}
	return out
}

// sortByDepth orders scatterers in small tiles, row by row in depth (tiles
// of 1 mm in z and 2 mm in x), so that consecutive scatterers deposit into
// nearby parts of every channel and the accumulators stay in cache. The order
// is deterministic.
func sortByDepth(s []Scatterer) {
	const tz, tx = 1e-3, 2e-3
	key := func(p Scatterer) (int, int) {
		return int(math.Floor(p.Z / tz)), int(math.Floor(p.X / tx))
	}
	sort.SliceStable(s, func(i, j int) bool {
		zi, xi := key(s[i])
		zj, xj := key(s[j])
		if zi != zj {
			return zi < zj
		}
		if xi != xj {
			return xi < xj
		}
		if s[i].Z != s[j].Z {
			return s[i].Z < s[j].Z
		}
		return s[i].X < s[j].X
	})
}
