package dsp

import (
	"fmt"
	"math"
	"math/cmplx"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"
)

const (
	// xcorrLagTol is the accuracy the issue asks of XCorrLag on a
	// band-limited pulse; the parabola's bias on a correlation peak ~10
	// samples wide is far smaller.
	xcorrLagTol = 0.05
	// phaseLagTol is the accuracy the issue asks of PhaseLag for small
	// delays; for a spectrum symmetric about omega it is exact up to
	// round-off, hence also phaseLagTight.
	phaseLagTol   = 0.02
	phaseLagTight = 1e-4
	// sameCoefTol: a signal correlates with itself to 1 up to float64
	// accumulation of float32 samples.
	sameCoefTol = 1e-9
	// noiseCoefMax: |rho| of independent complex white noise is Rayleigh with
	// scale 1/sqrt(2N) ~ 0.011 for N = 4096; 0.1 is ~9 scales, so even the
	// largest of the 17 lags stays below it.
	noiseCoefMax = 0.1
)

// Test pulse: f0 = 0.1 cycles/sample (e.g. 5 MHz sampled at 50 MHz), Gaussian
// envelope sigma = 5 samples (about 75 % -6 dB fractional bandwidth).
const (
	pulseN     = 256
	pulseF0    = 0.1
	pulseSigma = 5.0
	pulseAt    = 120.0
)

// delayedPulses returns the analytic signals of a Gaussian-modulated cosine a
// and of its copy b delayed by d samples, b[n] = a[n - d]. The delay is the
// FFT phase ramp exp(-j 2 pi k d / M) on the real signal's spectrum, exact
// for band-limited signals; the pulse is far from both ends, so the circular
// shift does not wrap.
func delayedPulses(d float64) (a, b []complex64) {
	x, _ := gaussCos(pulseN, pulseAt, pulseF0, pulseSigma)
	fft := fourier.NewFFT(pulseN)
	c := fft.Coefficients(nil, x)
	for k := range c {
		c[k] *= cmplx.Exp(complex(0, -2*math.Pi*float64(k)*d/pulseN))
	}
	// The Nyquist bin of a real signal must stay real; the pulse has ~e^-200
	// there, so drop it.
	c[len(c)-1] = 0
	y := fft.Sequence(nil, c)
	for i := range y {
		y[i] /= pulseN
	}
	h := NewHilbert(pulseN)
	return analytic32(h, x), analytic32(h, y)
}

func analytic32(h *Hilbert, x []float64) []complex64 {
	x32 := make([]float32, len(x))
	for i, v := range x {
		x32[i] = float32(v)
	}
	return h.Analytic(nil, x32)
}

func TestXCorrLagRecoversDelay(t *testing.T) {
	t.Parallel()
	delays := []float64{-3, -2.61, -1.5, -0.75, -0.37, -0.1, 0, 0.05, 0.25, 0.5, 0.93, 1.37, 2, 2.5, 2.99, 3}
	worst := 0.0
	for _, d := range delays {
		a, b := delayedPulses(d)
		lag, coef := XCorrLag(a, b, 6)
		worst = max(worst, math.Abs(lag-d))
		if math.Abs(lag-d) > xcorrLagTol || coef < 0.99 || coef > 1 {
			t.Errorf("delay %g: XCorrLag = %.4f (coef %.4f)", d, lag, coef)
		}
		// Swapping the signals flips the sign.
		if back, _ := XCorrLag(b, a, 6); math.Abs(back+lag) > 1e-6 {
			t.Errorf("delay %g: swapped XCorrLag = %.4f, want %.4f", d, back, -lag)
		}
	}
	t.Logf("XCorrLag worst error %.4f samples", worst)
}

func TestXCorrLagIntegerShift(t *testing.T) {
	t.Parallel()
	// Sign convention by construction: b[n] = a[n-2], a 2-sample delay.
	rng := newRand()
	a := make([]complex64, 64)
	for i := range a {
		a[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	b := make([]complex64, len(a))
	copy(b[2:], a)
	lag, coef := XCorrLag(a, b, 5)
	if math.Abs(lag-2) > xcorrLagTol || coef < 0.9 {
		t.Errorf("b[n] = a[n-2]: XCorrLag = %g (coef %g), want +2", lag, coef)
	}
	// Different lengths: a window of a against a longer record that starts
	// two samples earlier, so w2[n] = a[n+8] = w1[n-2]: delayed by 2.
	lag, _ = XCorrLag(a[10:40], a[8:50], 5)
	if math.Abs(lag-2) > xcorrLagTol {
		t.Errorf("offset windows: XCorrLag = %g, want +2", lag)
	}
}

func TestXCorrLagSameAndNoise(t *testing.T) {
	t.Parallel()
	a, _ := delayedPulses(0)
	if lag, coef := XCorrLag(a, a, 4); lag != 0 || math.Abs(coef-1) > sameCoefTol {
		t.Errorf("identical: XCorrLag = (%g, %g), want (0, 1)", lag, coef)
	}
	if lag, coef := PhaseLag(a, a, 2*math.Pi*pulseF0); lag != 0 || math.Abs(coef-1) > sameCoefTol {
		t.Errorf("identical: PhaseLag = (%g, %g), want (0, 1)", lag, coef)
	}
	// Scaling one signal changes nothing: the coefficient is normalized.
	scaled := make([]complex64, len(a))
	for i, v := range a {
		scaled[i] = v * complex(-3.5, 2)
	}
	if _, coef := XCorrLag(a, scaled, 4); math.Abs(coef-1) > 1e-6 {
		t.Errorf("scaled copy: coef %g, want 1", coef)
	}

	rng := newRand()
	const n = 4096
	u, v := make([]complex64, n), make([]complex64, n)
	for i := range u {
		u[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		v[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	if _, coef := XCorrLag(u, v, 8); coef > noiseCoefMax {
		t.Errorf("independent noise: XCorrLag coef %g, want < %g", coef, noiseCoefMax)
	}
	if _, coef := PhaseLag(u, v, 1); coef > noiseCoefMax {
		t.Errorf("independent noise: PhaseLag coef %g, want < %g", coef, noiseCoefMax)
	}
}

func TestXCorrLagEdgesAndZeros(t *testing.T) {
	t.Parallel()
	// A 5-sample delay searched over +-3 lands on the range's end, unrefined.
	a, b := delayedPulses(5)
	if lag, _ := XCorrLag(a, b, 3); lag != 3 {
		t.Errorf("delay beyond maxLag: XCorrLag = %g, want 3", lag)
	}
	if lag, coef := XCorrLag(a, make([]complex64, len(a)), 3); lag != 0 || coef != 0 {
		t.Errorf("zero signal: (%g, %g), want (0, 0)", lag, coef)
	}
	if lag, coef := XCorrLag(nil, nil, 3); lag != 0 || coef != 0 {
		t.Errorf("empty: (%g, %g), want (0, 0)", lag, coef)
	}
	if lag, coef := PhaseLag(a, make([]complex64, len(a)), 1); lag != 0 || coef != 0 {
		t.Errorf("PhaseLag zero signal: (%g, %g), want (0, 0)", lag, coef)
	}
	// maxLag 0: only zero lag.
	if lag, coef := XCorrLag(a, a, 0); lag != 0 || math.Abs(coef-1) > sameCoefTol {
		t.Errorf("maxLag 0: (%g, %g)", lag, coef)
	}
	// A maxLag larger than the signals is clamped to the overlap.
	short := []complex64{1, 2i, -1}
	if lag, coef := XCorrLag(short, short, 100); lag != 0 || math.Abs(coef-1) > sameCoefTol {
		t.Errorf("huge maxLag: (%g, %g)", lag, coef)
	}
	for name, f := range map[string]func(){
		"negative maxLag": func() { XCorrLag(a, b, -1) },
		"length mismatch": func() { PhaseLag(a, b[1:], 1) },
		"zero omega":      func() { PhaseLag(a, b, 0) },
		"NaN omega":       func() { PhaseLag(a, b, math.NaN()) },
	} {
		if !panics(f) {
			t.Errorf("%s: did not panic", name)
		}
	}
}

func TestPhaseLagRecoversDelay(t *testing.T) {
	t.Parallel()
	omega := 2 * math.Pi * pulseF0 // rad/sample; half a period is 5 samples
	worst := 0.0
	for _, d := range []float64{-1, -0.6, -0.25, -0.05, 0, 0.01, 0.1, 0.37, 0.5, 0.8, 1} {
		t.Run(fmt.Sprint(d), func(t *testing.T) {
			a, b := delayedPulses(d)
			lag, coef := PhaseLag(a, b, omega)
			worst = max(worst, math.Abs(lag-d))
			if math.Abs(lag-d) > phaseLagTol {
				t.Errorf("delay %g: PhaseLag = %.5f", d, lag)
			}
			if math.Abs(lag-d) > phaseLagTight {
				t.Errorf("delay %g: PhaseLag = %.6f, expected exact to %g for a symmetric spectrum", d, lag, phaseLagTight)
			}
			// The zero-lag coefficient drops with the envelope's decorrelation:
			// for Gaussian envelopes, exp(-d^2 / (4 sigma^2)).
			if want := math.Exp(-d * d / (4 * pulseSigma * pulseSigma)); math.Abs(coef-want) > 1e-4 {
				t.Errorf("delay %g: coef %.6f, closed form %.6f", d, coef, want)
			}
		})
	}
	t.Logf("PhaseLag worst error %.2g samples", worst)
}
