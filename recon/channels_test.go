package recon_test

import (
	"math"
	"testing"

	"celerity/acq"
	"celerity/recon"
)

// TestPrepareRF: a Gaussian-windowed tone at the demodulation frequency,
// r(t) = g(t) cos(2 pi f0 (t - tc)), has the analytic signal
// g(t) exp(j 2 pi f0 (t - tc)) (its negative-frequency content is
// exp(-(2 pi f0 sigma)^2 / 2), far below float32), so its baseband is
// g(t) exp(-j 2 pi f0 tc) at absolute time t = start + n / fs (derived; the
// IQ convention of FORMAT.md).
func TestPrepareRF(t *testing.T) {
	t.Parallel()
	p := probeN(t, 2)
	const (
		ns    = 400
		start = 3.3e-6 // s: the convention uses absolute time
		tc    = 13.1e-6
		sigma = 1e-6
	)
	f0 := p.CenterFrequencyHz
	a := &acq.Acquisition{Probe: p, SamplingRateHz: fsHz, StartTimeS: start, AssumedSpeedMPS: c1540, Kind: acq.RF,
		Events: acq.PlaneWaveSequence(&p, []float64{0}, c1540), NumSamples: ns, RF: make([]float32, 2*ns)}
	for j := range 2 {
		for n := range ns {
			tt := start + float64(n)/fsHz
			a.RF[j*ns+n] = float32(float64(j+1) * math.Exp(-(tt-tc)*(tt-tc)/(2*sigma*sigma)) * math.Cos(2*math.Pi*f0*(tt-tc)))
		}
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		t.Fatal(err)
	}
	if ch.NE != 1 || ch.NN != 2 || ch.NS != ns || ch.FS != fsHz || ch.T0 != start || ch.FD != f0 {
		t.Fatalf("channels %d x %d x %d at %g Hz from %g s, demodulated at %g Hz", ch.NE, ch.NN, ch.NS, ch.FS, ch.T0, ch.FD)
	}
	// tol: float32 samples and the FFT's rounding, relative to the peak
	const tol = 1e-5
	rot := complex(math.Cos(2*math.Pi*f0*tc), -math.Sin(2*math.Pi*f0*tc))
	for j := range 2 {
		row := ch.Row(0, j)
		for n := range ns {
			tt := start + float64(n)/fsHz
			want := complex(float64(j+1)*math.Exp(-(tt-tc)*(tt-tc)/(2*sigma*sigma)), 0) * rot
			got := complex128(row[n])
			if d := math.Hypot(real(got-want), imag(got-want)); d > tol*float64(j+1) {
				t.Fatalf("element %d sample %d: %v, want %v", j, n, got, want)
			}
		}
	}
}

func TestPrepareIQAndErrors(t *testing.T) {
	t.Parallel()
	p := probeN(t, 2)
	a := &acq.Acquisition{Probe: p, SamplingRateHz: fsHz, AssumedSpeedMPS: c1540, Kind: acq.IQ, DemodulationHz: 4e6,
		Events: acq.PlaneWaveSequence(&p, []float64{0}, c1540), NumSamples: 8, IQ: make([]complex64, 16)}
	a.IQ[5] = 1 + 2i
	ch, err := recon.Prepare(a)
	if err != nil {
		t.Fatal(err)
	}
	if ch.FD != 4e6 || ch.Row(0, 0)[5] != 1+2i || len(ch.Data) != 16 {
		t.Errorf("IQ data not passed through: fd %g, %v", ch.FD, ch.Row(0, 0))
	}
	short := *a
	short.IQ = a.IQ[:15]
	rf := *a
	rf.Kind, rf.IQ, rf.RF = acq.RF, nil, make([]float32, 15)
	bad := *a
	bad.SamplingRateHz = -1
	unknown := *a
	unknown.Kind = 0
	for name, b := range map[string]*acq.Acquisition{"short IQ": &short, "short RF": &rf, "bad header": &bad, "unknown kind": &unknown} {
		if _, err := recon.Prepare(b); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
}
