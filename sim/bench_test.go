package sim

import (
	"math/rand/v2"
	"testing"

	"celerity/acq"
)

// speckleConfig is the benchmark case of the simulator: a 128-element linear
// array and a 40 x 40 mm speckle region at 10 scatterers per resolution cell.
func speckleConfig(b *testing.B, events []acq.Event) *Config {
	p, _ := Preset("linear-128")
	lat, ax := ResolutionCell(Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}, 1540)
	rng := rand.New(rand.NewPCG(1, 2))
	sc, err := Speckle(rng, Region{-0.02, 0.02, 0.005, 0.045}, 10, lat*ax)
	if err != nil {
		b.Fatal(err)
	}
	sortByDepth(sc)
	return &Config{Probe: p, Events: events, AssumedSpeedMPS: 1540, SamplingRateHz: 20e6, NumSamples: 1400,
		Medium: Homogeneous(1540), Scatterers: sc}
}

// BenchmarkPlaneWaveSpeckle: one plane wave; target at most 3 s on 2 cores.
func BenchmarkPlaneWaveSpeckle(b *testing.B) {
	p, _ := Preset("linear-128")
	cfg := speckleConfig(b, acq.PlaneWaveSequence(&p, []float64{0}, 1540))
	n := 0
	for b.Loop() {
		if _, err := Simulate(cfg); err != nil {
			b.Fatal(err)
		}
		n++
	}
	b.ReportMetric(float64(len(cfg.Scatterers)), "scatterers")
	b.ReportMetric(b.Elapsed().Seconds()/float64(n), "s/sim")
}

// BenchmarkSyntheticApertureSpeckle: the full 128 x 128 transmit-receive
// set; target at most 60 s and 4 GiB on 2 cores.
func BenchmarkSyntheticApertureSpeckle(b *testing.B) {
	p, _ := Preset("linear-128")
	cfg := speckleConfig(b, acq.SyntheticApertureSequence(&p))
	n := 0
	for b.Loop() {
		if _, err := Simulate(cfg); err != nil {
			b.Fatal(err)
		}
		n++
	}
	b.ReportMetric(b.Elapsed().Seconds()/float64(n), "s/sim")
}
