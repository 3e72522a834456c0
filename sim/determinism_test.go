package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"celerity/acq"
)

// noiseStdTol: the measured noise std must equal rms(signal) 10^(-snr/20)
// within 2 % (the brief's tolerance); with at least 10800 noise samples the
// estimate's own scatter, 1 / sqrt(2 N), is at most 0.7 %.
const noiseStdTol = 0.02

// detConfig is a small acquisition that exercises every part of the model:
// two layers, attenuation, a phase screen, speckle, a point target and noise.
func detConfig(t testing.TB, events func(p *acq.Probe) []acq.Event) *Config {
	const n = 24
	p := testProbe(n)
	rng := rand.New(rand.NewPCG(1, 2))
	xs := make([]float64, n)
	for i, e := range p.Elements() {
		xs[i] = e.X
	}
	scr, err := DrawScreen(rng, xs, 25e-9, 3e-3)
	checkNoErr(t, err)
	lat, ax := ResolutionCell(Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}, 1540)
	sc, err := Speckle(rng, Region{X0: -0.004, X1: 0.004, Z0: 0.006, Z1: 0.014}, 5, lat*ax)
	checkNoErr(t, err)
	sc = append(sc, Scatterer{X: 0.0005, Z: 0.010, Amp: 20})
	sortByDepth(sc)
	snr := 20.0
	return &Config{Probe: p, Events: events(&p), AssumedSpeedMPS: 1540, SamplingRateHz: 20e6, NumSamples: 450,
		Medium:     Medium{Layers: []acq.Layer{{ThicknessM: 0.004, SpeedMPS: 1460}, {SpeedMPS: 1560}}, AttenuationDBPerCmMHz: 0.5},
		Screen:     scr,
		Scatterers: sc, NoiseSNRDB: &snr, Seed: 7}
}

// sequences covers the three ways Simulate schedules work: one event with
// the scatterers split in fixed blocks (direct), many events one per worker
// (direct), and several full-aperture events (synthesis).
var sequences = []struct {
	name   string
	events func(p *acq.Probe) []acq.Event
}{
	{"one plane wave", func(p *acq.Probe) []acq.Event { return acq.PlaneWaveSequence(p, []float64{5}, 1540) }},
	{"synthetic aperture", func(p *acq.Probe) []acq.Event { return acq.SyntheticApertureSequence(p) }},
	{"three plane waves", func(p *acq.Probe) []acq.Event { return acq.PlaneWaveSequence(p, []float64{-6, 0, 6}, 1540) }},
}

// TestDeterminism: the same Config and seed give identical bytes, whatever
// the number of workers (1, 2 or 3).
func TestDeterminism(t *testing.T) {
	t.Parallel()
	for _, sq := range sequences {
		t.Run(sq.name, func(t *testing.T) {
			t.Parallel()
			var ref []float32
			for _, w := range []int{1, 2, 3, 2} {
				cfg := detConfig(t, sq.events)
				cfg.Workers = w
				a, err := Simulate(cfg)
				checkNoErr(t, err)
				if ref == nil {
					ref = a.RF
					continue
				}
				for k := range ref {
					if math.Float32bits(ref[k]) != math.Float32bits(a.RF[k]) {
						t.Fatalf("workers=%d: sample %d is %g, with 1 worker %g", w, k, a.RF[k], ref[k])
					}
				}
			}
		})
	}
}

// TestNoiseLevel: the added noise is white Gaussian with std
// rms(signal) * 10^(-snr/20), the rms taken over all events, elements and
// samples of the noise-free data (the definition of Config.NoiseSNRDB);
// it has zero mean, the events' noise is uncorrelated, and the seed sets it.
func TestNoiseLevel(t *testing.T) {
	t.Parallel()
	for _, sq := range sequences {
		for _, snr := range []float64{0, 20, 40} {
			t.Run(fmt.Sprintf("%s/%gdB", sq.name, snr), func(t *testing.T) {
				t.Parallel()
				cfg := detConfig(t, sq.events)
				cfg.NoiseSNRDB = nil
				clean, err := Simulate(cfg)
				checkNoErr(t, err)
				cfg.NoiseSNRDB = &snr
				noisy, err := Simulate(cfg)
				checkNoErr(t, err)
				var ss float64
				for _, v := range clean.RF {
					ss += float64(v) * float64(v)
				}
				want := math.Sqrt(ss/float64(len(clean.RF))) * math.Pow(10, -snr/20)
				noise := make([]float64, len(clean.RF))
				var m, m2 float64
				for k := range noise {
					noise[k] = float64(noisy.RF[k]) - float64(clean.RF[k])
					m += noise[k]
				}
				N := float64(len(noise))
				m /= N
				for _, v := range noise {
					m2 += (v - m) * (v - m)
				}
				std := math.Sqrt(m2 / (N - 1))
				t.Logf("snr %g dB: noise std %.5g, rms(signal) 10^(-snr/20) = %.5g (%+.2f %%), %d samples",
					snr, std, want, 100*(std/want-1), len(noise))
				if math.Abs(std/want-1) > noiseStdTol {
					t.Errorf("snr %g dB: noise std %.5g, want %.5g", snr, std, want)
				}
				// 5 standard errors
				if se := want / math.Sqrt(N); math.Abs(m) > 5*se {
					t.Errorf("noise mean %.3g, want 0 within %.3g", m, 5*se)
				}
				if ne := cfg.Events; len(ne) > 1 {
					per := len(noise) / len(ne)
					var c float64
					for k := range per {
						c += noise[k] * noise[per+k]
					}
					if r := c / float64(per) / (std * std); math.Abs(r) > 5/math.Sqrt(float64(per)) {
						t.Errorf("events 0 and 1: noise correlation %.3g", r)
					}
				}
				// another seed, other noise; the same seed, the same bytes
				cfg.Seed = 8
				other, err := Simulate(cfg)
				checkNoErr(t, err)
				same := 0
				for k := range other.RF {
					if other.RF[k] == noisy.RF[k] {
						same++
					}
				}
				if same > len(other.RF)/100 {
					t.Errorf("seed 8 repeats %d of %d samples of seed 7", same, len(other.RF))
				}
				cfg.Seed = 7
				again, err := Simulate(cfg)
				checkNoErr(t, err)
				for k := range again.RF {
					if math.Float32bits(again.RF[k]) != math.Float32bits(noisy.RF[k]) {
						t.Fatalf("same seed, different sample %d", k)
					}
				}
			})
		}
	}
}

// TestPathsIndependentOfHistory: a scatterer's path table (travel times and
// phasors to every element) is the same, bit for bit, whichever scatterer
// the worker's tracer traced before. The layered ray solve starts from the
// last ray parameter and stops within a rounding error that depends on that
// start, so without a reset per scatterer the table (and so the channel
// data) depended on how the scatterers were split among workers.
func TestPathsIndependentOfHistory(t *testing.T) {
	t.Parallel()
	p := testProbe(64)
	rng := rand.New(rand.NewPCG(1, 2))
	for _, layers := range [][]acq.Layer{fatOverLiver, threeLayers} {
		m := Layered(layers...)
		cfg := &Config{Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540), AssumedSpeedMPS: 1540,
			SamplingRateHz: 20e6, NumSamples: 800, Medium: m}
		pl := newPlan(cfg)
		n := p.Count
		tw, pw := make([]float32, n), make([]complex64, n)
		tc, pc := make([]float32, n), make([]complex64, n)
		warm := newTracer(&m)
		for k := range 3000 {
			s := Scatterer{X: (rng.Float64() - 0.5) * 0.02, Z: 0.001 + rng.Float64()*0.03, Amp: 1}
			pl.fillPaths(warm, s, tw, pw)
			pl.fillPaths(newTracer(&m), s, tc, pc)
			for j := range tw {
				if math.Float32bits(tw[j]) != math.Float32bits(tc[j]) || pw[j] != pc[j] {
					t.Fatalf("scatterer %d (%+v), element %d: after other scatterers tau %v ph %v, alone tau %v ph %v",
						k, s, j, tw[j], pw[j], tc[j], pc[j])
				}
			}
		}
	}
}

// TestDeterminismWorkerBoundary is the case that exposed the dependence on
// the number of workers: with two workers the second scatterer is traced by
// a fresh tracer, with one worker after the first; 99 of the 51200 samples
// differed in their last bits before the tracer was reset per scatterer.
func TestDeterminismWorkerBoundary(t *testing.T) {
	t.Parallel()
	p := testProbe(64)
	sc := []Scatterer{{X: 0.0031737017822133584, Z: 0.02381602443897468, Amp: 1},
		{X: 0.007495746227036262, Z: 0.020444383986778572, Amp: 1}}
	var ref []float32
	for _, w := range []int{1, 2} {
		cfg := &Config{Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540), AssumedSpeedMPS: 1540,
			SamplingRateHz: 20e6, NumSamples: 800, Medium: Layered(threeLayers...), Scatterers: sc, Workers: w}
		a, err := Simulate(cfg)
		checkNoErr(t, err)
		if ref == nil {
			ref = a.RF
			continue
		}
		for k := range ref {
			if math.Float32bits(ref[k]) != math.Float32bits(a.RF[k]) {
				t.Fatalf("workers 1 and %d differ at sample %d: %g vs %g", w, k, ref[k], a.RF[k])
			}
		}
	}
}

// TestFusedMatchesTable: for a few events, tracing paths a chunk at a time
// and depositing row by row (simulateFused) gives the same records, bit for
// bit, as the whole path table traced first; among the
// cases a single-element event (one impulse per scatterer) and a scatterer
// whose echoes run past the end of the record.
func TestFusedMatchesTable(t *testing.T) {
	cases := []struct {
		name   string
		events func(p *acq.Probe) []acq.Event
	}{
		sequences[0], sequences[2],
		{"one element", func(p *acq.Probe) []acq.Event { return []acq.Event{singleElement(p.NumElements(), 5)} }},
	}
	for _, c := range cases {
		cfg := detConfig(t, c.events)
		cfg.NoiseSNRDB = nil
		cfg.Scatterers = append(cfg.Scatterers, Scatterer{X: 0.002, Z: 0.0168, Amp: 3})
		fuseFew = true
		fused, err := simulateDirect(cfg, 2)
		checkNoErr(t, err)
		fuseFew = false
		table, err := simulateDirect(cfg, 2)
		fuseFew = true
		checkNoErr(t, err)
		var nonzero int
		for k := range table {
			if math.Float32bits(fused[k]) != math.Float32bits(table[k]) {
				t.Fatalf("%s: sample %d is %g fused, %g from the table", c.name, k, fused[k], table[k])
			}
			if table[k] != 0 {
				nonzero++
			}
		}
		if nonzero < len(table)/4 {
			t.Fatalf("%s: only %d of %d samples are not zero", c.name, nonzero, len(table))
		}
	}
}
