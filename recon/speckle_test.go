package recon_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"celerity/acq"
	"celerity/metrics"
	"celerity/recon"
	"celerity/sim"
)

// TestSpeckleSNR: in fully developed speckle the envelope is Rayleigh
// distributed, with mean/std = sqrt(pi / (4 - pi)) = 1.913 (Burckhardt,
// IEEE Trans. Sonics Ultrason. 25(1), 1978; Wagner et al. 1983; citation
// details from memory, CHECKS.md).
//
// The pixels are sampled about one resolution cell apart (laterally
// 1.2 lambda F for one plane wave at F/1, axially the pulse's -6 dB length)
// so that they are nearly independent, from six independent speckle
// realisations of the same region, 2520 samples in all: the estimate's
// standard error is about 0.71 / sqrt(N) of its value, 0.027 (derived from
// the Rayleigh moments: Var(ln mean/std) = (0.273 + 0.561 - 0.330) / N),
// somewhat more as neighbouring samples still correlate a little. The region is 4 mm deep, so the mean
// brightness varies across it by only a few percent, which lowers the
// ratio by well under 0.01.
//
// Density. sim.Speckle draws Gaussian amplitudes, whose fourth moment is
// three times that of equal amplitudes, so the envelope approaches the
// Rayleigh law only with many scatterers per cell: at sim's default of 10
// per (lambda x pulse length) cell the pooled ratio here comes out 1.82
// (measured when writing this test), at 50 per cell 1.89 and at 100 1.91.
// The test uses 50, which keeps the simulation to a few seconds.
func TestSpeckleSNR(t *testing.T) {
	t.Parallel()
	const (
		want    = 1.913 // sqrt(pi / (4 - pi)), Burckhardt 1978
		tol     = 0.1   // task
		density = 50.0  // scatterers per sim.ResolutionCell area
		seeds   = 6
	)
	p := probeN(t, 64)
	lam := lambda(p, c1540)
	lat, ax := sim.ResolutionCell(sim.Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}, c1540)
	// Speckle reaches 1.4 mm (several resolution cells) beyond the sampled
	// pixels on every side, so that every pixel sees speckle all round.
	region := sim.Region{X0: -0.005, X1: 0.005, Z0: 0.016, Z1: 0.024}
	g, err := recon.NewRect(-0.0036, 0.0036, 1.2*lam, 0.018, 0.022, ax)
	if err != nil {
		t.Fatal(err)
	}
	m := recon.NewHomogeneous(c1540, p.Elements())
	evs := acq.PlaneWaveSequence(&p, []float64{0}, c1540)
	var pool []float64
	for seed := range uint64(seeds) {
		sc, err := sim.Speckle(rand.New(rand.NewPCG(seed+1, 7)), region, density, lat*ax)
		if err != nil {
			t.Fatal(err)
		}
		a := simulate(t, simSpec{probe: p, events: evs, medium: sim.Homogeneous(c1540), scatter: sc, maxDepth: 0.025})
		env := envelope(t, a, &g, m, recon.Config{FNumber: 1})
		t.Logf("realisation %d: %d scatterers, %d samples, mean/std %.3f", seed+1, len(sc), len(env), metrics.SpeckleSNR(env))
		pool = append(pool, env...)
	}
	got := metrics.SpeckleSNR(pool)
	t.Logf("pooled: %d samples, mean/std %.3f (Rayleigh %.3f)", len(pool), got, want)
	if math.Abs(got-want) > tol {
		t.Errorf("speckle mean/std %.3f, want %.3f +/- %g", got, want, tol)
	}
}
