package recon

import (
	"math"

	"celerity/acq"
	"celerity/internal/dsp"
)

// apodizer gives the receive weight of element j for a pixel: an F-number
// aperture centred on the pixel's foot on the array, tapered by a window,
// and an element directivity cut-off.
type apodizer struct {
	els    []acq.Element
	s      []float64 // element coordinate along the array, m
	convex bool
	radius float64
	fnum   float64
	dscale float64 // multiplies the depth used by the F-number rule
	win    dsp.Window
	cosMax float64 // directivity cut-off as cos(theta_max); -1 for none
	half   float64 // half the array length (full-aperture window)
	centre float64
}

func newApodizer(p *acq.Probe, cfg Config, c float64) *apodizer {
	a := &apodizer{els: p.Elements(), fnum: cfg.FNumber, win: cfg.Window, cosMax: -1, dscale: 1}
	if cfg.ApertureDepthScale > 0 {
		a.dscale = cfg.ApertureDepthScale
	}
	a.convex = p.Geometry == acq.Convex
	a.radius = p.RadiusM
	a.s = make([]float64, len(a.els))
	lo, hi := math.Inf(1), math.Inf(-1)
	for j, e := range a.els {
		if a.convex {
			a.s[j] = a.radius * math.Atan2(e.X, e.Z+a.radius)
		} else {
			a.s[j] = e.X
		}
		lo, hi = math.Min(lo, a.s[j]), math.Max(hi, a.s[j])
	}
	a.half = math.Max((hi-lo)/2, 1e-9)
	a.centre = (hi + lo) / 2
	deg := cfg.MaxAngleDeg
	if deg == 0 && p.ElementWidthM > 0 {
		// -6 dB of sinc(w sin(theta)/lambda): sinc(u) = 1/2 at u = 0.6034
		sin := 0.6034 * (c / p.CenterFrequencyHz) / p.ElementWidthM
		if sin < 1 {
			deg = math.Asin(sin) * 180 / math.Pi
		}
	}
	if deg > 0 && deg < 90 {
		a.cosMax = math.Cos(deg * math.Pi / 180)
	}
	return a
}

// foot returns the pixel's coordinate along the array and its depth below it.
func (a *apodizer) foot(x, z float64) (s, d float64) {
	if a.convex {
		return a.radius * math.Atan2(x, z+a.radius), math.Hypot(x, z+a.radius) - a.radius
	}
	return x, z
}

func (a *apodizer) weight(j int, x, z float64) float64 {
	e := a.els[j]
	dx, dz := x-e.X, z-e.Z
	r := math.Sqrt(dx*dx + dz*dz)
	if r == 0 {
		return 0
	}
	if a.cosMax > -1 && (dx*e.NX+dz*e.NZ)/r < a.cosMax {
		return 0
	}
	if a.fnum <= 0 {
		return a.win.At((a.s[j] - a.centre) / a.half)
	}
	s, d := a.foot(x, z)
	if d <= 0 {
		return 0
	}
	half := d * a.dscale / (2 * a.fnum)
	u := (a.s[j] - s) / half
	if math.Abs(u) > 1 {
		return 0
	}
	// keep at least the nearest element when the aperture is narrower than the pitch
	return math.Max(a.win.At(u), 1e-6)
}
