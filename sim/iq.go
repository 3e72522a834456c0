package sim

import (
	"fmt"
	"math"

	"celerity/acq"
	"celerity/internal/dsp"
)

// ToIQ converts RF channel data to IQ at the same sampling rate with the
// convention of the acquisition folder: iq(t) = a(t) exp(-j 2 pi fd t), where
// a is the analytic signal of the RF (FFT method) and t the absolute sample
// time StartTimeS + n / SamplingRateHz.
func ToIQ(a *acq.Acquisition, fd float64) (*acq.Acquisition, error) {
	if a.Kind != acq.RF {
		return nil, fmt.Errorf("to IQ: the acquisition is already %s", a.Kind)
	}
	if !(fd >= 0) || math.IsInf(fd, 0) {
		return nil, fmt.Errorf("to IQ: demodulation frequency must be finite and non-negative")
	}
	out := *a
	out.RF = nil
	out.Kind = acq.IQ
	out.DemodulationHz = fd
	out.IQ = make([]complex64, len(a.RF))
	rot := make([]complex64, a.NumSamples)
	for n := range rot {
		t := a.StartTimeS + float64(n)/a.SamplingRateHz
		s, c := math.Sincos(-2 * math.Pi * math.Mod(fd*t, 1))
		rot[n] = complex(float32(c), float32(s))
	}
	h := dsp.NewHilbert(a.NumSamples)
	for e := range a.NumEvents() {
		for j := range a.NumElements() {
			dst := out.IQChannel(e, j)
			h.Analytic(dst, a.RFChannel(e, j))
			for n := range dst {
				dst[n] *= rot[n]
			}
		}
	}
	return &out, nil
}
