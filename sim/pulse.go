package sim

import "math"

// Pulse is the two-way Gaussian-modulated sinusoid
//
//	p(t) = exp(-t^2 / (2 sigma^2)) cos(2 pi f0 t)
//
// whose spectrum has a -6 dB fractional bandwidth B:
// sigma_f = B f0 / (2 sqrt(2 ln 2)), sigma = 1 / (2 pi sigma_f). Its envelope
// has a -6 dB width of 4 ln 2 / (pi B f0) in time.
type Pulse struct {
	CenterHz  float64
	Bandwidth float64 // fractional, -6 dB
}

// SigmaT returns the Gaussian envelope's standard deviation in s.
func (p Pulse) SigmaT() float64 { return 1 / (2 * math.Pi * p.SigmaF()) }

// SigmaF returns the spectrum's standard deviation in Hz.
func (p Pulse) SigmaF() float64 {
	return p.Bandwidth * p.CenterHz / (2 * math.Sqrt(2*math.Ln2))
}

// EnvelopeWidth returns the -6 dB width of the envelope in s: 4 ln2 / (pi B f0).
func (p Pulse) EnvelopeWidth() float64 {
	return 4 * math.Ln2 / (math.Pi * p.Bandwidth * p.CenterHz)
}

// HalfLength returns the time beyond which the envelope is below 1e-6 of its peak.
func (p Pulse) HalfLength() float64 { return p.SigmaT() * math.Sqrt(2*math.Log(1e6)) }

// attenuated returns the centre frequency and amplitude of the pulse after a
// path of length l through a medium whose amplitude attenuation is alpha
// Np/(m Hz) (linear in frequency). A Gaussian spectrum times exp(-alpha f l)
// stays Gaussian: its centre moves to f0 - alpha l sigma_f^2 and its peak
// scales by exp(-alpha l f0 + (alpha l sigma_f)^2 / 2).
func (p Pulse) attenuated(alpha, l float64) (fc, amp float64) {
	sf := p.SigmaF()
	a := alpha * l
	fc = p.CenterHz - a*sf*sf
	amp = math.Exp(-a*p.CenterHz + a*a*sf*sf/2)
	if fc < 0 {
		fc = 0
	}
	return fc, amp
}

// dbPerCmMHzToNp converts an attenuation slope in dB/(cm MHz) to Np/(m Hz).
func dbPerCmMHzToNp(v float64) float64 {
	return v * 100 / 1e6 / (20 / math.Ln10)
}
