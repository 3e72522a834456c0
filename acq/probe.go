package acq

import (
	"fmt"
	"math"
)

// Element is one transducer element: its centre and unit outward normal.
type Element struct {
	X, Z   float64 // m
	NX, NZ float64 // unit normal, pointing into the medium
}

// Geometry says how the element positions are given.
type Geometry int

// Probe geometries.
const (
	Linear Geometry = iota + 1
	Convex
	Explicit
)

func (g Geometry) String() string {
	switch g {
	case Linear:
		return "linear"
	case Convex:
		return "convex"
	case Explicit:
		return "explicit"
	}
	return "unknown"
}

// Probe is the transducer: its elements and nominal pulse.
type Probe struct {
	CenterFrequencyHz float64
	// FractionalBandwidth is the -6 dB two-way fractional bandwidth; 0 if unknown.
	FractionalBandwidth float64
	// ElementWidthM is the element width used for directivity; 0 if unknown.
	ElementWidthM float64

	Geometry Geometry
	Count    int     // linear, convex
	PitchM   float64 // linear, convex (arc length between centres for convex)
	RadiusM  float64 // convex
	// Positions holds explicit element centres [x, z] when Geometry is Explicit.
	Positions [][2]float64
}

// NewLinear returns a linear array of count elements at the given pitch,
// centred on x = 0.
func NewLinear(count int, pitchM, centerHz float64) Probe {
	return Probe{Geometry: Linear, Count: count, PitchM: pitchM, CenterFrequencyHz: centerHz}
}

// NewConvex returns a convex array of count elements at the given arc pitch on
// a circle of the given radius; the middle of the arc touches z = 0.
func NewConvex(count int, pitchM, radiusM, centerHz float64) Probe {
	return Probe{Geometry: Convex, Count: count, PitchM: pitchM, RadiusM: radiusM, CenterFrequencyHz: centerHz}
}

// NumElements returns the number of elements.
func (p *Probe) NumElements() int {
	if p.Geometry == Explicit {
		return len(p.Positions)
	}
	return p.Count
}

// Elements returns the element centres and normals.
//
// Linear: x_k = (k - (N-1)/2) * pitch, z = 0, normal +z.
// Convex: phi_k = (k - (N-1)/2) * pitch / R, x = R sin(phi), z = R cos(phi) - R,
// normal (sin phi, cos phi): the centre of curvature is at (0, -R).
// Explicit: the given positions, normal +z.
func (p *Probe) Elements() []Element {
	n := p.NumElements()
	out := make([]Element, n)
	mid := float64(n-1) / 2
	switch p.Geometry {
	case Linear:
		for k := range out {
			out[k] = Element{X: (float64(k) - mid) * p.PitchM, NZ: 1}
		}
	case Convex:
		for k := range out {
			phi := (float64(k) - mid) * p.PitchM / p.RadiusM
			s, c := math.Sincos(phi)
			out[k] = Element{X: p.RadiusM * s, Z: p.RadiusM*c - p.RadiusM, NX: s, NZ: c}
		}
	case Explicit:
		for k, q := range p.Positions {
			out[k] = Element{X: q[0], Z: q[1], NZ: 1}
		}
	}
	return out
}

// Wavelength returns the centre wavelength in m at speed c.
func (p *Probe) Wavelength(c float64) float64 { return c / p.CenterFrequencyHz }

// Aperture returns the lateral span of the element centres in m.
func (p *Probe) Aperture() float64 {
	els := p.Elements()
	if len(els) == 0 {
		return 0
	}
	lo, hi := els[0].X, els[0].X
	for _, e := range els {
		lo, hi = math.Min(lo, e.X), math.Max(hi, e.X)
	}
	return hi - lo
}

// MeanPitch returns the mean distance between neighbouring element centres.
func (p *Probe) MeanPitch() float64 {
	els := p.Elements()
	if len(els) < 2 {
		return 0
	}
	s := 0.0
	for k := 1; k < len(els); k++ {
		s += math.Hypot(els[k].X-els[k-1].X, els[k].Z-els[k-1].Z)
	}
	return s / float64(len(els)-1)
}

// MaxElements bounds the number of elements of a probe.
const MaxElements = 1 << 14

// Validate checks the probe, naming fields as in acquisition.yaml.
func (p *Probe) Validate() error {
	bad := func(field, format string, args ...any) error {
		return fmt.Errorf("probe.%s: "+format, append([]any{field}, args...)...)
	}
	if !(p.CenterFrequencyHz > 0) || math.IsInf(p.CenterFrequencyHz, 0) {
		return bad("center_frequency_hz", "must be positive and finite, got %g", p.CenterFrequencyHz)
	}
	if p.FractionalBandwidth < 0 || p.FractionalBandwidth > 2 || math.IsNaN(p.FractionalBandwidth) {
		return bad("fractional_bandwidth", "must be between 0 and 2, got %g", p.FractionalBandwidth)
	}
	if p.ElementWidthM < 0 || p.ElementWidthM > 0.1 || math.IsNaN(p.ElementWidthM) {
		return bad("element_width_m", "must be between 0 and 0.1 m, got %g", p.ElementWidthM)
	}
	switch p.Geometry {
	case Linear, Convex:
		g := p.Geometry.String()
		if p.Count < 1 || p.Count > MaxElements {
			return bad(g+".count", "must be between 1 and %d, got %d", MaxElements, p.Count)
		}
		if !(p.PitchM > 0) || p.PitchM > 0.1 || math.IsInf(p.PitchM, 0) {
			return bad(g+".pitch_m", "must be positive and at most 0.1 m, got %g", p.PitchM)
		}
		if p.Geometry == Convex {
			if !(p.RadiusM > 0) || p.RadiusM > 10 || math.IsInf(p.RadiusM, 0) {
				return bad("convex.radius_m", "must be positive and at most 10 m, got %g", p.RadiusM)
			}
			if float64(p.Count-1)*p.PitchM/p.RadiusM >= 2*math.Pi {
				return bad("convex", "the arc (count-1)*pitch_m/radius_m spans a full circle or more")
			}
		}
	case Explicit:
		n := len(p.Positions)
		if n < 1 || n > MaxElements {
			return bad("elements_m", "must list between 1 and %d elements, got %d", MaxElements, n)
		}
		for i, q := range p.Positions {
			for k, v := range q {
				if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1 {
					return bad(fmt.Sprintf("elements_m[%d][%d]", i, k), "must be finite and within 1 m of the origin, got %g", v)
				}
			}
		}
	default:
		return fmt.Errorf("probe: exactly one of linear, convex or elements_m is required")
	}
	return nil
}
