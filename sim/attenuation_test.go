package sim

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"

	"celerity/acq"
	"celerity/internal/dsp"
)

// downshiftTol: the measured centroid downshift must match the closed form
// within 3 %. The simulator applies attenuation as a pulse chosen per output
// sample for the path length c t in steps of 0.5 mm, so across one echo
// (about +/- 0.5 mm of path) the pulse steps through a few neighbouring path
// lengths; that costs under 0.2 % of the shift here. The simulated RF pulse is
// the real part of a Gaussian envelope on a carrier at the shifted centre, so
// its spectrum also holds the mirror of the negative-frequency half: when
// attenuation moves the centre down to 2 sigma_f (1 dB/cm/MHz over 80 mm of
// path, 40 dB at 5 MHz) the mirror adds 1.7 % to the measured shift.
const downshiftTol = 0.03

// attenAmpTol: the echo's envelope peak must scale with the closed-form
// factor within 2 % (the path length used at the peak is rounded to the
// 0.5 mm pulse step: 0.7 % of amplitude per 0.25 mm at 1 dB/cm/MHz, 5 MHz;
// the depths below make the two-way path a whole number of steps).
const attenAmpTol = 0.02

// TestAttenuationDownshift checks frequency-dependent attenuation against the
// closed form for a Gaussian spectrum. Derived (Kak & Dines, IEEE TBME 1978):
// a Gaussian spectrum exp(-(f - f0)^2 / (2 sigma_f^2)) times exp(-alpha f l),
// alpha in Np/(m Hz), l the two-way path, is again Gaussian with the same
// sigma_f, centred at f0 - alpha l sigma_f^2, and scaled by
// exp(-alpha l f0 + (alpha l sigma_f)^2 / 2). The centroid of the echo's power
// spectrum is its centre, so the measured downshift (against the same echo
// without attenuation) must be alpha l sigma_f^2, and the envelope peak must
// fall by the scale factor.
func TestAttenuationDownshift(t *testing.T) {
	t.Parallel()
	const (
		n  = 16
		fs = 20e6
		c  = 1540.0
	)
	probe := testProbe(n)
	els := probe.Elements()
	const i = n / 2
	pulse := Pulse{CenterHz: probe.CenterFrequencyHz, Bandwidth: probe.FractionalBandwidth}
	sf := pulse.SigmaF()
	echo := func(depth, dbCmMHz float64) (centroid, peak float64) {
		ns := int(math.Ceil((2*depth/c + 2e-6) * fs))
		cfg := &Config{Probe: probe, Events: []acq.Event{singleElement(n, i)}, AssumedSpeedMPS: c, SamplingRateHz: fs,
			NumSamples: ns, Medium: Medium{Layers: []acq.Layer{{SpeedMPS: c}}, AttenuationDBPerCmMHz: dbCmMHz},
			Scatterers: []Scatterer{{X: els[i].X, Z: depth, Amp: 1}}}
		a, err := Simulate(cfg)
		checkNoErr(t, err)
		rf := a.RFChannel(0, i)
		_, peak, ok := envelopePeak(dsp.NewHilbert(ns), rf, fs, 0, 2*depth/c-0.5e-6, 2*depth/c+0.5e-6)
		if !ok {
			t.Fatalf("depth %g mm, %g dB/cm/MHz: no echo", depth*1e3, dbCmMHz)
		}
		return powerCentroid(rf, fs), peak
	}
	for _, depth := range []float64{0.020, 0.040} {
		f0c, p0 := echo(depth, 0)
		// derived: without attenuation the centroid is f0 (the Gaussian's
		// overlap with negative frequencies and the band above Nyquist,
		// exp(-(f0/sigma_f)^2) = 1e-5 of the power, move it by far less than 0.1 %)
		if math.Abs(f0c/pulse.CenterHz-1) > 1e-3 {
			t.Errorf("depth %g mm: centroid without attenuation %.4f MHz, want f0 = %.4f MHz", depth*1e3, f0c/1e6, pulse.CenterHz/1e6)
		}
		for _, db := range []float64{0.3, 0.5, 1.0} {
			alpha := dbPerCmMHzToNp(db)
			// derived: 1 Np = 20 / ln 10 dB, 1 dB/(cm MHz) = 100 / 1e6 dB/(m Hz)
			if want := db * 100 / 1e6 * math.Ln10 / 20; math.Abs(alpha-want) > 1e-18 {
				t.Fatalf("dbPerCmMHzToNp(%g) = %g, want %g", db, alpha, want)
			}
			l := 2 * depth
			fc, p := echo(depth, db)
			want := alpha * l * sf * sf
			got := f0c - fc
			wantAmp := math.Exp(-alpha*l*pulse.CenterHz + (alpha*l*sf)*(alpha*l*sf)/2)
			t.Logf("depth %2.0f mm, %.1f dB/cm/MHz: downshift %.1f kHz (closed form %.1f kHz, %+.2f %%); amplitude x%.4f (closed form x%.4f, %+.2f %%)",
				depth*1e3, db, got/1e3, want/1e3, 100*(got/want-1), p/p0, wantAmp, 100*(p/p0/wantAmp-1))
			if math.Abs(got/want-1) > downshiftTol {
				t.Errorf("depth %g mm, %g dB/cm/MHz: centroid downshift %.1f kHz, closed form %.1f kHz", depth*1e3, db, got/1e3, want/1e3)
			}
			if math.Abs(p/p0/wantAmp-1) > attenAmpTol {
				t.Errorf("depth %g mm, %g dB/cm/MHz: amplitude ratio %.4f, closed form %.4f", depth*1e3, db, p/p0, wantAmp)
			}
		}
	}
}

// powerCentroid returns the centroid sum f |X(f)|^2 / sum |X(f)|^2 of a real
// signal's power spectrum over 0 <= f <= fs/2, zero-padded to 4 times its
// length.
func powerCentroid(x []float32, fs float64) float64 {
	m := dsp.NextFastLen(4 * len(x))
	in := make([]float64, m)
	for k, v := range x {
		in[k] = float64(v)
	}
	spec := fourier.NewFFT(m).Coefficients(nil, in)
	var num, den float64
	for k, v := range spec {
		p := real(v)*real(v) + imag(v)*imag(v)
		f := float64(k) * fs / float64(m)
		num += f * p
		den += p
	}
	return num / den
}
