package aberration

import (
	"math"

	"celerity/acq"
)

// Sub-apertures for compounded waves.
//
// Compounding a few plane or diverging waves focuses the transmit only
// coarsely: a main lobe about lambda / (sin a_max - sin a_min) wide, where a
// are the directions of the waves at the pixel, and grating lobes where the
// waves come back into phase (for 11 plane waves 1.6 degrees apart, about
// 11 mm to either side). By the van Cittert-Zernike theorem the main lobe's
// echoes stay coherent across the receive aperture over a length
// z (sin a_max - sin a_min) (several millimetres), while the grating lobes'
// echoes arrive steeply (tens of degrees off axis) and alternate in phase
// from one element to the next: the lag-one coherence of such data is about
// 0.1, and neighbour correlations, whose phase the grating-lobe clutter
// sets, are noise. Summing k adjacent elements before correlating is a
// spatial low-pass across the aperture: it keeps the slowly varying main-lobe
// echoes and cancels most of the alternating clutter. The estimate's steps
// see the profile through the same box, smoothed, but the iteration's fixed
// point, where the corrected data of every sub-aperture line up, is the
// profile itself.

// maxSubApertureM caps the sub-aperture length: about half the shortest
// correlation length of the body-wall aberrators in CHECKS.md (2.5 mm), so
// that one step still passes most of such a screen's variation.
const maxSubApertureM = 1.5e-3

// subApertureFor returns the number of adjacent elements summed before the
// neighbour and many-pairs correlations: 1 (none) unless the events are three
// or more compounded plane or diverging waves; then the odd number nearest
// to a third of the main lobe's coherence length at the shallowest patch,
// at most maxSubApertureM, in element pitches.
func subApertureFor(a *acq.Acquisition, events []int, patches []Patch, x []float64) int {
	if !acq.CompoundedWaves(a, events) || len(x) < 2 || len(patches) == 0 {
		return 1
	}
	pitch := math.Abs(x[len(x)-1]-x[0]) / float64(len(x)-1)
	if !(pitch > 0) {
		return 1
	}
	if events == nil {
		events = make([]int, a.NumEvents())
		for i := range events {
			events[i] = i
		}
	}
	// the shallowest patch's centre, where the coherence length is shortest
	p0 := patches[0]
	for _, p := range patches[1:] {
		if p.Z0 < p0.Z0 {
			p0 = p
		}
	}
	xc, z := (p0.X0+p0.X1)/2, p0.Z0
	els := a.Probe.Elements()
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, e := range events {
		w := acq.DeriveWavefront(els, &a.Events[e], a.AssumedSpeedMPS, 0, a.Probe.CenterFrequencyHz)
		var s float64
		switch w.Kind {
		case acq.KindPlaneWave:
			s = math.Sin(w.Theta)
		case acq.KindDiverging:
			s = (xc - w.VX) / math.Hypot(xc-w.VX, z-w.VZ)
		default:
			return 1
		}
		lo, hi = math.Min(lo, s), math.Max(hi, s)
	}
	coh := z * (hi - lo)
	l := math.Min(coh/3, maxSubApertureM) / pitch
	k := 2*int(math.Round((l-1)/2)) + 1
	return max(1, k)
}
