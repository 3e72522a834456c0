package sim

import (
	"math"
	"testing"

	"celerity/acq"
)

// TestSynthesisMatchesDirect checks the superposition route against direct
// simulation: both model the same physics, so the records agree closely (the
// direct route merges transmit elements whose arrivals fall within a tenth
// of the envelope sigma (groupFrac), an approximation the synthesis route
// does not make).
func TestSynthesisMatchesDirect(t *testing.T) {
	t.Parallel()
	p, _ := Preset("linear-128")
	p.Count = 48
	els := p.Elements()
	_ = els
	evs := acq.PlaneWaveSequence(&p, []float64{-10, 0, 7}, 1540)
	evs = append(evs, acq.DivergingSequence(&p, [][2]float64{{0.002, -0.008}}, 1540)...)
	evs = append(evs, acq.FocusedSequence(&p, []float64{-0.001}, 0.015, 2, 1540)...)
	scr := make([]float64, p.Count)
	for i := range scr {
		scr[i] = 30e-9 * math.Sin(float64(i)/3)
	}
	cfg := &Config{Probe: p, Events: evs, AssumedSpeedMPS: 1540, SamplingRateHz: 20e6, NumSamples: 700,
		Medium: Layered(acq.Layer{ThicknessM: 0.006, SpeedMPS: 1450}, acq.Layer{SpeedMPS: 1560}), Screen: scr,
		Scatterers: []Scatterer{{X: 0.001, Z: 0.012, Amp: 1}, {X: -0.003, Z: 0.02, Amp: -0.5}, {X: 0.004, Z: 0.008, Amp: 0.7}}}
	if !useSynthesis(cfg) {
		t.Fatal("expected the synthesis route")
	}
	syn, err := synthesize(cfg, 2)
	if err != nil {
		t.Fatal(err)
	}
	dir, err := simulateDirect(cfg, 2)
	if err != nil {
		t.Fatal(err)
	}
	per := p.Count * cfg.NumSamples
	for e := range evs {
		var se, sd float64
		for k := e * per; k < (e+1)*per; k++ {
			d := float64(syn[k] - dir[k])
			se += d * d
			sd += float64(dir[k]) * float64(dir[k])
		}
		rel := math.Sqrt(se / sd)
		// tolerance: the direct route's envelope merging error, well below 1 %
		const tol = 0.01
		if rel > tol {
			t.Errorf("event %d: synthesis differs from direct by %.3g rms (relative)", e, rel)
		}
		t.Logf("event %d: relative rms difference %.2e", e, rel)
	}
}
