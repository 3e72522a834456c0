package speed

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"celerity/acq"
	"celerity/recon"
	"celerity/sim"
)

// Criteria on synthetic aperture-domain data whose answer is known in closed
// form. Each pixel's aperture data a_j (j = 0..N-1) is drawn from a stated
// model and pooled with sums.accumulate, exactly as Sweep pools the delayed
// channel signals.

// cnorm draws a circular complex Gaussian of variance v (E|z|^2 = v).
func cnorm(rng *rand.Rand, v float64) complex64 {
	s := math.Sqrt(v / 2)
	return complex(float32(s*rng.NormFloat64()), float32(s*rng.NormFloat64()))
}

// poolSynthetic accumulates pixels pixels of N-element aperture data drawn by
// draw into sums with lags up to maxLag.
func poolSynthetic(pixels, n, maxLag int, active []bool, draw func(a []complex64)) *sums {
	s := newSums(maxLag)
	a := make([]complex64, n)
	if active == nil {
		active = make([]bool, n)
		for j := range active {
			active[j] = true
		}
	}
	for range pixels {
		draw(a)
		s.accumulate(a, active)
	}
	return &s
}

func TestCriteriaIdenticalSignals(t *testing.T) {
	t.Parallel()
	// Identical signals on every element: |sum a|^2 = N^2 |s|^2 and
	// N sum |a|^2 = N^2 |s|^2, so the coherence factor is 1 exactly
	// (definition, Mallart & Fink 1994), and every lag's normalised
	// correlation is 1 (definition, Lediju et al. 2011; Long et al. 2018).
	const (
		n, maxLag = 64, 6
		tol       = 1e-6 // float32 aperture data, float64 sums
	)
	rng := rand.New(rand.NewPCG(1, 2))
	s := poolSynthetic(500, n, maxLag, nil, func(a []complex64) {
		v := cnorm(rng, 1)
		for j := range a {
			a[j] = v
		}
	})
	for _, c := range []Criterion{CoherenceFactor, LagOneCoherence, ShortLagCoherence} {
		if got := s.value(c, maxLag); math.Abs(got-1) > tol {
			t.Errorf("%s of identical signals = %.9f, want 1", c, got)
		}
	}
	// Brightness is the mean of |sum a|^2 = N^2 E|s|^2 (Nock et al. 1989, as
	// the mean beamformed intensity); with 500 exponential intensities its
	// standard error is 1/sqrt(500) = 4.5 % of the mean.
	if got, want := s.value(Brightness, maxLag), float64(n*n); math.Abs(got/want-1) > 5*0.045 {
		t.Errorf("brightness %.1f, want about %g (N^2 E|s|^2)", got, want)
	}
}

func TestCriteriaInactiveElementsIgnored(t *testing.T) {
	t.Parallel()
	// Elements outside the aperture must not count: identical signals on the
	// active half, anything on the rest, still give coherence 1 (definition).
	const n, maxLag = 32, 3
	active := make([]bool, n)
	for j := 8; j < 24; j++ {
		active[j] = true
	}
	rng := rand.New(rand.NewPCG(3, 4))
	s := poolSynthetic(200, n, maxLag, active, func(a []complex64) {
		v := cnorm(rng, 1)
		for j := range a {
			if active[j] {
				a[j] = v
			} else {
				a[j] = cnorm(rng, 100)
			}
		}
	})
	for _, c := range []Criterion{CoherenceFactor, LagOneCoherence, ShortLagCoherence} {
		if got := s.value(c, maxLag); math.Abs(got-1) > 1e-6 {
			t.Errorf("%s with noise on inactive elements = %.9f, want 1", c, got)
		}
	}
}

func TestCriteriaIndependentNoise(t *testing.T) {
	t.Parallel()
	// Independent zero-mean noise of equal power on N elements:
	// E|sum a|^2 = N sigma^2 and N E sum |a|^2 = N^2 sigma^2, so the coherence
	// factor is 1/N (derived from the definition, Mallart & Fink 1994); the
	// correlation of distinct elements is 0 at every lag.
	const (
		n, maxLag, pixels = 64, 6, 20000
		// The numerator is a sum of 20000 exponential intensities: relative
		// standard error 1/sqrt(20000) = 0.7 %; 5 % is seven of them.
		relTolCF = 0.05
		// The lag sums hold about 20000*63 products of unit-variance
		// independent terms normalised by their power: standard error
		// about 1/sqrt(2*20000*63) = 6e-4; 0.005 is eight of them.
		tolLag = 0.005
	)
	rng := rand.New(rand.NewPCG(5, 6))
	s := poolSynthetic(pixels, n, maxLag, nil, func(a []complex64) {
		for j := range a {
			a[j] = cnorm(rng, 1)
		}
	})
	if got, want := s.value(CoherenceFactor, maxLag), 1.0/n; math.Abs(got/want-1) > relTolCF {
		t.Errorf("coherence factor of independent noise %.5f, want 1/N = %.5f", got, want)
	}
	for _, c := range []Criterion{LagOneCoherence, ShortLagCoherence} {
		if got := s.value(c, maxLag); math.Abs(got) > tolLag {
			t.Errorf("%s of independent noise %.5f, want 0", c, got)
		}
	}
	// The intensity of a sum of many independent complex Gaussians is
	// exponential, whose variance equals its squared mean: normalized
	// variance 1 (derived; the same law as fully developed speckle,
	// Burckhardt 1978). Relative standard error about sqrt(8/20000) = 2 %.
	if got := s.value(NormalizedVariance, maxLag); math.Abs(got-1) > 0.1 {
		t.Errorf("normalized variance of Gaussian sums %.3f, want 1", got)
	}
}

func TestLagOneCoherenceSNR(t *testing.T) {
	t.Parallel()
	// A signal common to all elements (power S) plus independent noise on
	// each (power N0): lag-one coherence = S / (S + N0) = SNR^2 / (1 + SNR^2)
	// with SNR = sqrt(S / N0), i.e. SNR = sqrt(LOC / (1 - LOC)) (Long et al.,
	// IEEE TUFFC 65(10), 2018; from memory, CHECKS.md). The coherence factor
	// of the same data is (N S + N0) / (N (S + N0)) (derived from its
	// definition: E|sum a|^2 = N^2 S + N N0, N E sum |a|^2 = N^2 (S + N0)).
	const (
		n, pixels = 64, 4000
		// Fluctuations of the common signal's power cancel in the ratio; the
		// noise cross terms leave a standard error under 0.003.
		tolLOC = 0.01
		tolCF  = 0.01
	)
	for _, snr := range []float64{0.3, 1, 3, 10} {
		rng := rand.New(rand.NewPCG(7, uint64(snr*10)))
		s := poolSynthetic(pixels, n, 1, nil, func(a []complex64) {
			v := cnorm(rng, 1)
			for j := range a {
				a[j] = v + cnorm(rng, 1/(snr*snr))
			}
		})
		loc := s.value(LagOneCoherence, 1)
		want := snr * snr / (1 + snr*snr)
		if math.Abs(loc-want) > tolLOC {
			t.Errorf("SNR %g: lag-one coherence %.4f, want SNR^2/(1+SNR^2) = %.4f", snr, loc, want)
		}
		s0, n0 := 1.0, 1/(snr*snr)
		wantCF := (n*s0 + n0) / (n * (s0 + n0))
		if got := s.value(CoherenceFactor, 1); math.Abs(got-wantCF) > tolCF {
			t.Errorf("SNR %g: coherence factor %.4f, want %.4f", snr, got, wantCF)
		}
		t.Logf("SNR %5.1f: LOC %.4f (want %.4f), SNR back from LOC %.3f", snr, loc, want, math.Sqrt(loc/(1-loc)))
	}
}

func TestCriteriaUndefined(t *testing.T) {
	t.Parallel()
	// No pixels, or only zeros: every criterion is undefined (NaN), which
	// Sweep turns into an error rather than a peak.
	s := newSums(3)
	for _, c := range Criteria() {
		if v := s.value(c, 3); !math.IsNaN(v) {
			t.Errorf("%s of empty sums = %g, want NaN", c, v)
		}
	}
	s.accumulate(make([]complex64, 8), []bool{true, true, true, true, true, true, true, true})
	for _, c := range []Criterion{CoherenceFactor, LagOneCoherence, ShortLagCoherence, NormalizedVariance} {
		if v := s.value(c, 3); !math.IsNaN(v) {
			t.Errorf("%s of zero data = %g, want NaN", c, v)
		}
	}
	if v := s.value(Criterion(99), 3); !math.IsNaN(v) {
		t.Errorf("unknown criterion = %g, want NaN", v)
	}
}

func TestParseCriterion(t *testing.T) {
	t.Parallel()
	for _, c := range Criteria() {
		got, err := ParseCriterion(c.String())
		if err != nil || got != c {
			t.Errorf("ParseCriterion(%q) = %v, %v", c.String(), got, err)
		}
	}
	_, err := ParseCriterion("sharpness")
	if err == nil || !strings.Contains(err.Error(), "coherence-factor") {
		t.Errorf("unknown name: error %v should list the criteria", err)
	}
	if s := Criterion(0).String(); s != "unknown" {
		t.Errorf("Criterion(0).String() = %q", s)
	}
}

// TestCoherenceFactorSpeckleSA checks the coherence factor of fully developed
// speckle at a synthetic-aperture focus against the van Cittert-Zernike
// prediction. The pulse-echo coherence of diffuse echoes at the focus, across
// receive elements m apart, is the autocorrelation of the transmit aperture:
// 1 - m/N for a uniform aperture of N elements (Mallart & Fink, JASA 90(5),
// 1991; CHECKS.md). With the same N elements on receive,
//
//	CF = sum_jk (1 - |j-k|/N) / N^2 = 2/3 + 1/(3 N^2)
//
// (derived, CHECKS.md; also Mallart & Fink, JASA 96(6), 1994). Synthetic
// aperture focuses on transmit at every pixel, and the sweep's beamformer
// uses the same F-number rule for the transmitting and the receiving
// elements, so every pixel sees this model.
func TestCoherenceFactorSpeckleSA(t *testing.T) {
	t.Parallel()
	const (
		c = 1540.0
		// The simulator weights each element by its directivity
		// cos(theta) sinc(w sin(theta) / lambda) and 1/r, which tapers the
		// effective aperture to about 0.6 at its edges at F/1; with that
		// taper the same model gives 0.687 (derived numerically from the
		// autocorrelation of the tapered aperture). The region holds some
		// 200 speckle cells, so the sampling error is about 0.01. 0.04
		// covers both.
		tolCF = 0.04
	)
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	p.Count = 64 // a 64-element array keeps the simulation to about a second
	pulse := sim.Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}
	lat, ax := sim.ResolutionCell(pulse, c)
	// 20 scatterers per (small) resolution cell: fully developed speckle.
	sc, err := sim.Speckle(rand.New(rand.NewPCG(5, 11)), sim.Region{X0: -5e-3, X1: 5e-3, Z0: 11e-3, Z1: 19e-3}, 20, lat*ax)
	if err != nil {
		t.Fatal(err)
	}
	a, err := sim.Simulate(&sim.Config{Probe: p, Events: acq.SyntheticApertureSequence(&p), AssumedSpeedMPS: c,
		SamplingRateHz: 20e6, NumSamples: 1000, Medium: sim.Homogeneous(c), Scatterers: sc, Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		t.Fatal(err)
	}
	// Every transmit event: the sweep's default even subset of long
	// sequences would thin the transmit aperture, whose autocorrelation is
	// then no longer the triangle.
	all := make([]int, a.NumEvents())
	for i := range all {
		all[i] = i
	}
	for _, fnum := range []float64{1, 2} {
		cfg := SweepConfig{Region: &Region{X0: -2e-3, X1: 2e-3, Z0: 13e-3, Z1: 17e-3}, FNumber: fnum, Events: all}
		if err := cfg.defaults(a); err != nil {
			t.Fatal(err)
		}
		ts := newTiledSweep(a, ch, &cfg, *cfg.Region)
		tiles, err := ts.ev.run(c)
		if err != nil {
			t.Fatal(err)
		}
		pool := newSums(ts.ev.maxLag)
		for i := range tiles {
			pool.add(&tiles[i])
		}
		nAct := 15e-3 / fnum / p.PitchM // active elements at the region's centre
		want := 2.0/3 + 1/(3*nAct*nAct)
		got := pool.value(CoherenceFactor, ts.ev.maxLag)
		t.Logf("F/%g: %.0f elements, coherence factor %.4f (uniform aperture %.4f), lag-one coherence %.4f (uniform 1 - 1/N = %.4f)",
			fnum, nAct, got, want, pool.value(LagOneCoherence, ts.ev.maxLag), 1-1/nAct)
		if math.Abs(got-want) > tolCF {
			t.Errorf("F/%g: coherence factor of speckle at the synthetic-aperture focus %.4f, want %.4f +/- %g", fnum, got, want, tolCF)
		}
	}
}
