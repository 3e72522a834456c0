package recon_test

import (
	"fmt"
	"log"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/recon"
	"celerity/sim"
)

// A point target 12 mm deep in a 1480 m/s medium, one plane wave, imaged
// at the true speed and at the scanner's 1540 m/s: at the wrong speed the
// point appears deeper by the ratio of the speeds (12 mm x 1540 / 1480 =
// 12.49 mm).
func ExampleBeamformer_Form() {
	p, err := sim.Preset("linear-128")
	if err != nil {
		log.Fatal(err)
	}
	p.Count = 32
	a, err := sim.Simulate(&sim.Config{
		Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540), AssumedSpeedMPS: 1540,
		SamplingRateHz: 20e6, NumSamples: 400, Medium: sim.Homogeneous(1480),
		Scatterers: []sim.Scatterer{{X: 0.001, Z: 0.012, Amp: 1}},
	})
	if err != nil {
		log.Fatal(err)
	}
	ch, err := recon.Prepare(a) // RF to baseband, once
	if err != nil {
		log.Fatal(err)
	}
	g, err := recon.NewRect(-0.002, 0.004, 0.05e-3, 0.010, 0.014, 0.05e-3)
	if err != nil {
		log.Fatal(err)
	}
	for _, c := range []float64{1480, 1540} {
		bf, err := recon.NewBeamformer(a, &g, recon.NewHomogeneous(c, p.Elements()),
			recon.Config{FNumber: 1.5, Window: dsp.Window{Kind: dsp.Hann}})
		if err != nil {
			log.Fatal(err)
		}
		img, err := bf.Form(nil, ch)
		if err != nil {
			log.Fatal(err)
		}
		env := recon.Envelope(img)
		best := 0
		for i, v := range env {
			if v > env[best] {
				best = i
			}
		}
		fmt.Printf("at %.0f m/s: brightest pixel at x = %.2f mm, z = %.2f mm\n", c, g.PX[best]*1e3, g.PZ[best]*1e3)
	}
	// Output:
	// at 1480 m/s: brightest pixel at x = 1.00 mm, z = 12.00 mm
	// at 1540 m/s: brightest pixel at x = 1.00 mm, z = 12.50 mm
}

// Travel time from an element through a 12 mm fat-like layer to a point
// below it, refracted at the interface, against straight rays at the
// time-averaged speed.
func ExampleNewLayered() {
	els := []acq.Element{{X: -0.01, NZ: 1}}
	m, err := recon.NewLayered([]acq.Layer{{ThicknessM: 0.012, SpeedMPS: 1450}, {SpeedMPS: 1570}}, els)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(m)
	vMean := 0.02 / (0.012/1450 + 0.008/1570)
	h := recon.NewHomogeneous(vMean, els)
	fmt.Printf("layered %.3f us, straight at %.1f m/s %.3f us\n", m.Receive(0, 0, 0.02)*1e6, vMean, h.Receive(0, 0, 0.02)*1e6)
	// Output:
	// layered: 12 mm at 1450.00 m/s, 1570.00 m/s below
	// layered 14.947 us, straight at 1495.7 m/s 14.950 us
}
