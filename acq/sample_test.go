package acq_test

import (
	"math"
	"path/filepath"
	"testing"

	"celerity/acq"
)

// The wires-steered sample was written by code independent of celerity (see
// /work/shared/samples/README.md, copied here under testdata/samples).
// Its README gives the numbers checked below.
var wiresDir = filepath.Join("..", "testdata", "samples", "wires-steered")

func TestLoadReferenceSample(t *testing.T) {
	t.Parallel()
	a, err := acq.Load(wiresDir)
	if err != nil {
		t.Fatal(err)
	}
	// Sample README: 64-element linear array, 0.25 mm pitch, 5 MHz, 60 %
	// bandwidth, RF sampled at 20 MHz, three plane waves.
	if got := a.Shape(); got != [3]int{3, 64, 1266} {
		t.Errorf("shape %v, want [3 64 1266]", got)
	}
	if a.Kind != acq.RF || len(a.RF) != 3*64*1266 || a.IQ != nil {
		t.Errorf("kind %v with %d RF and %d IQ samples, want rf", a.Kind, len(a.RF), len(a.IQ))
	}
	if a.SamplingRateHz != 20e6 || a.Probe.CenterFrequencyHz != 5e6 || a.Probe.FractionalBandwidth != 0.6 {
		t.Errorf("fs %g, f0 %g, bandwidth %g; want 20 MHz, 5 MHz, 0.6", a.SamplingRateHz, a.Probe.CenterFrequencyHz, a.Probe.FractionalBandwidth)
	}
	if a.Probe.Geometry != acq.Linear || a.Probe.Count != 64 || a.Probe.PitchM != 0.25e-3 {
		t.Errorf("probe %v %d x %g m", a.Probe.Geometry, a.Probe.Count, a.Probe.PitchM)
	}
	if a.AssumedSpeedMPS != 1540 || a.StartTimeS != 0 {
		t.Errorf("assumed speed %g, start %g", a.AssumedSpeedMPS, a.StartTimeS)
	}
	energy := 0.0
	for _, v := range a.RF {
		energy += float64(v) * float64(v)
	}
	if !(energy > 0) {
		t.Error("the channel data are all zero")
	}

	els := a.Probe.Elements()
	nominal := []float64{-12, 0, 12}
	// Tolerances: the sample's delays are float64 values of the closed form;
	// a least-squares line through them recovers the angle to rounding.
	const angleTol = 0.01  // degrees, as the task specifies
	const delayTol = 1e-18 // s; a few float64 roundings of microsecond delays (ulp 4e-22)
	for i, ev := range a.Events {
		if l := ev.Label.PlaneWaveDeg; l == nil || *l != nominal[i] {
			t.Errorf("event %d: label %q, want plane wave %g deg", i, ev.Label, nominal[i])
		}
		// Independent check of PlaneWaveDelays: the sample's delays were
		// computed by other code for the same angles at 1540 m/s.
		ours := acq.PlaneWaveDelays(els, nominal[i]*math.Pi/180, 1540)
		for k := range ours {
			if d := math.Abs(ours[k] - ev.Delays[k]); d > delayTol {
				t.Errorf("event %d element %d: delay %g, PlaneWaveDelays gives %g", i, k, ev.Delays[k], ours[k])
				break
			}
		}

		// At the scanner's speed the delays launch the nominal angles.
		w := acq.DeriveWavefront(els, &a.Events[i], 1540, 0, a.Probe.CenterFrequencyHz)
		if w.Kind != acq.KindPlaneWave {
			t.Fatalf("event %d at 1540 m/s: %v, want a plane wave", i, w)
		}
		if got := w.Theta * 180 / math.Pi; math.Abs(got-nominal[i]) > angleTol {
			t.Errorf("event %d at 1540 m/s: %.4f deg, want %g", i, got, nominal[i])
		}

		// In the 1450 m/s medium: sin(theta) = c * slope (sample README;
		// derived: delays d = x sin(theta0)/c0 give slope sin(theta0)/c0).
		w = acq.DeriveWavefront(els, &a.Events[i], 1450, 0, a.Probe.CenterFrequencyHz)
		want := math.Asin(1450*math.Sin(nominal[i]*math.Pi/180)/1540) * 180 / math.Pi
		got := w.Theta * 180 / math.Pi
		if w.Kind != acq.KindPlaneWave || math.Abs(got-want) > angleTol {
			t.Errorf("event %d at 1450 m/s: %v (%.4f deg), want a plane wave at %.4f deg", i, w, got, want)
		}
		if s := 1450 * w.Slope; math.Abs(s-math.Sin(w.Theta)) > 1e-12 {
			t.Errorf("event %d: 1450 * slope = %g, sin(theta) = %g", i, s, math.Sin(w.Theta))
		}
		// README: "about -11.3 and +11.3 degrees"; numpy.polyfit on the
		// sample's delays gives 11.289183 deg (computed when adding the sample).
		if nominal[i] != 0 && math.Abs(math.Abs(got)-11.289183) > angleTol {
			t.Errorf("event %d at 1450 m/s: %.4f deg, want about ±11.29", i, got)
		}
	}

	s := acq.Summarize(a)
	if s.Counts[acq.KindPlaneWave] != 3 || len(s.AnglesDeg) != 3 {
		t.Errorf("summary %+v, want three plane waves", s)
	}
}

func TestLoadReferenceSampleTruth(t *testing.T) {
	t.Parallel()
	tr, err := acq.LoadTruthFile(filepath.Join("..", "testdata", "samples", "wires-steered.truth.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	// Sample README: medium 1450 m/s, three wires at (-3, 12), (0, 20),
	// (4, 30) mm, 35 dB channel SNR.
	want := [][2]float64{{-0.003, 0.012}, {0, 0.020}, {0.004, 0.030}}
	if tr.SpeedMPS != 1450 || tr.Layers != nil || tr.Seed != 101 || tr.NoiseSNRDB == nil || *tr.NoiseSNRDB != 35 {
		t.Errorf("truth %+v", tr)
	}
	if len(tr.TargetsM) != len(want) {
		t.Fatalf("targets %v, want %v", tr.TargetsM, want)
	}
	for i := range want {
		if tr.TargetsM[i] != want[i] {
			t.Errorf("target %d: %v, want %v", i, tr.TargetsM[i], want[i])
		}
	}
}
