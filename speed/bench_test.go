package speed

import (
	"testing"

	"celerity/acq"
	"celerity/sim"
)

// BenchmarkSweep times one full sweep (coarse grid, fine grid, quadratic
// peak and the default 200-resample bootstrap) of the default criterion on a
// single plane wave from the 128-element linear array, over a 20 x 20 mm
// region (8,500 pixels at the default spacing). Target: at most 2 s on two
// cores.
//
//	go test ./speed -run '^$' -bench Sweep -benchtime 5x
func BenchmarkSweep(b *testing.B) {
	p, err := sim.Preset("linear-128")
	if err != nil {
		b.Fatal(err)
	}
	a, ch, err := speckleSim{medium: sim.Homogeneous(1500), events: acq.PlaneWaveSequence(&p, []float64{0}, 1540),
		speckle: sim.Region{X0: -11e-3, X1: 11e-3, Z0: 14e-3, Z1: 36e-3}, depthM: 37e-3, snrDB: 20, seed: 1}.run()
	if err != nil {
		b.Fatal(err)
	}
	r := Region{X0: -10e-3, X1: 10e-3, Z0: 15e-3, Z1: 35e-3}
	cfg := SweepConfig{Region: &r, Seed: 1}
	var speeds, pixels int
	for b.Loop() {
		res, err := Sweep(a, ch, cfg)
		if err != nil {
			b.Fatal(err)
		}
		speeds = len(res.Curve)
	}
	// the pixels of the region, as Sweep lays them out
	c := cfg
	if err := c.defaults(a); err != nil {
		b.Fatal(err)
	}
	pixels = len(newTiledSweep(a, ch, &c, r).ev.xs)
	sec := b.Elapsed().Seconds() / float64(b.N)
	b.ReportMetric(sec, "s/sweep")
	b.ReportMetric(float64(speeds), "speeds/sweep")
	b.ReportMetric(float64(pixels*a.NumElements()*speeds)/sec, "px·el·speeds/s")
}
