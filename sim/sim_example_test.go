package sim_test

import (
	"fmt"
	"math"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/sim"
)

// A point target 20 mm deep under a 0-degree plane wave in a 1500 m/s
// medium: the echo on the element above it arrives after 2 z / c.
func ExampleSimulate() {
	p, _ := sim.Preset("linear-128")
	p.Count = 32 // a small array keeps the example fast
	cfg := &sim.Config{
		Probe:           p,
		Events:          acq.PlaneWaveSequence(&p, []float64{0}, 1540),
		AssumedSpeedMPS: 1540,
		SamplingRateHz:  40e6,
		NumSamples:      1400,
		Medium:          sim.Homogeneous(1500),
		Scatterers:      []sim.Scatterer{{X: p.Elements()[16].X, Z: 0.020, Amp: 1}},
	}
	a, err := sim.Simulate(cfg)
	if err != nil {
		fmt.Println(err)
		return
	}
	env := dsp.Envelope(nil, dsp.NewHilbert(a.NumSamples).Analytic(nil, a.RFChannel(0, 16)))
	y := make([]float64, len(env))
	for i, v := range env {
		y[i] = math.Log(float64(v) + 1e-30)
	}
	peak, _ := dsp.RefinedMax(y) // a parabola through the log-envelope
	fmt.Println("shape:", a.Shape())
	fmt.Printf("echo at %.3f us; 2 z / c = %.3f us\n", a.SampleTime(peak)*1e6, 2*0.020/1500*1e6)
	// Output:
	// shape: [1 32 1400]
	// echo at 26.667 us; 2 z / c = 26.667 us
}

// Travel times through flat layers follow Snell's law; the vertical path is
// the sum of the layer times.
func ExampleMedium_TravelTime() {
	m := sim.Layered(acq.Layer{ThicknessM: 0.010, SpeedMPS: 1450}, acq.Layer{SpeedMPS: 1570})
	fmt.Printf("vertical: %.4f us (10 mm / 1450 + 20 mm / 1570 = %.4f us)\n",
		m.TravelTime(0, 0, 0, 0.030)*1e6, (0.010/1450+0.020/1570)*1e6)
	fmt.Printf("10 mm aside: %.4f us\n", m.TravelTime(-0.010, 0, 0, 0.030)*1e6)
	// Output:
	// vertical: 19.6354 us (10 mm / 1450 + 20 mm / 1570 = 19.6354 us)
	// 10 mm aside: 20.6959 us
}

// A scenario in the units people type; Build turns it into a configuration
// and its ground truth, the same for the same seed.
func ExampleParseScenario() {
	yaml := `format: celerity.scenario/1
seed: 5
probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 64, pitch_mm: 0.3}
depth_mm: 30
transmit:
  plane_waves: {count: 3, max_angle_deg: 5}
medium:
  layers:
    - {thickness_mm: 8, speed_mps: 1450}
    - {speed_mps: 1560}
screen: {rms_ns: 20, correlation_length_mm: 3}
phantom:
  speckle: {region_mm: [-8, 8, 5, 25]}
  targets:
    positions_mm: [[0, 18]]
noise: {snr_db: 30}
`
	sc, err := sim.ParseScenario("example.yaml", []byte(yaml))
	if err != nil {
		fmt.Println(err)
		return
	}
	cfg, truth, err := sc.Build()
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%d events, %d elements, %d samples at %g MHz\n",
		len(cfg.Events), cfg.Probe.NumElements(), cfg.NumSamples, cfg.SamplingRateHz/1e6)
	fmt.Printf("%d scatterers; layers %v; screen %g ns rms\n", len(cfg.Scatterers), truth.Layers, truth.Screen.RMSS*1e9)
	_, err = sim.ParseScenario("bad.yaml", []byte("format: celerity.scenario/1\nprobe: {preset: linear-128}\n"))
	fmt.Println(err)
	// Output:
	// 3 events, 64 elements, 947 samples at 20 MHz
	// 54711 scatterers; layers [{0.008 1450} {0 1560}]; screen 20 ns rms
	// bad.yaml: depth_mm: required key is missing (line 1)
}
