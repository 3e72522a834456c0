package speed

import (
	"fmt"
	"math"
	"testing"
	"time"

	"celerity/acq"
	"celerity/recon"
	"celerity/sim"
)

func simWires(t testing.TB, p acq.Probe, events []acq.Event, c float64, targets [][2]float64, snr, depth float64, seed uint64) *acq.Acquisition {
	t.Helper()
	maxDelay := 0.0
	for _, ev := range events {
		for _, d := range ev.Delays {
			maxDelay = math.Max(maxDelay, d)
		}
	}
	fs := 20e6
	tEnd := (depth+math.Hypot(depth, p.Aperture()))/c + maxDelay + 2e-6
	var sc []sim.Scatterer
	for _, q := range targets {
		sc = append(sc, sim.Scatterer{X: q[0], Z: q[1], Amp: 1})
	}
	cfg := &sim.Config{Probe: p, Events: events, AssumedSpeedMPS: 1540, SamplingRateHz: fs,
		NumSamples: int(math.Ceil(tEnd * fs)), Medium: sim.Homogeneous(c), Scatterers: sc, Seed: seed}
	if snr > 0 {
		cfg.NoiseSNRDB = &snr
	}
	a, err := sim.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return a
}

func TestTargetsExplore(t *testing.T) {
	p, _ := sim.Preset("linear-128")
	tg := [][2]float64{{-5e-3, 12e-3}, {0, 20e-3}, {6e-3, 30e-3}}
	for _, c := range []float64{1450, 1540, 1600} {
		t0 := time.Now()
		a := simWires(t, p, acq.PlaneWaveSequence(&p, []float64{0}, 1540), c, tg, 30, 35e-3, 1)
		ch, err := recon.Prepare(a)
		if err != nil {
			t.Fatal(err)
		}
		t1 := time.Now()
		res, err := Targets(a, ch, TargetConfig{})
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("c=%g sim %v fit %v: %.3f ± %.3f %v %s", c, t1.Sub(t0), time.Since(t1), res.SpeedMPS, res.StdErrMPS, res.CI95MPS, res.Confidence)
		for _, f := range res.Targets {
			t.Logf("  %+v", f)
		}
		for _, n := range res.Notes {
			t.Logf("  note: %s", n)
		}
	}
}

func logRes(t *testing.T, name string, res *TargetResult, err error, d time.Duration) {
	if err != nil {
		t.Logf("%s: err %v", name, err)
		return
	}
	t.Logf("%s (%v): %.3f ± %.3f sys %.3f %v %s", name, d, res.SpeedMPS, res.StdErrMPS, res.SystematicMPS, res.CI95MPS, res.Confidence)
	for _, f := range res.Targets {
		t.Logf("  x %.4f z %.4f c %.3f se %.4f n %d rms %.3f off %.2f", f.XM*1e3, f.ZM*1e3, f.SpeedMPS, f.StdErrMPS, f.Channels, f.RMSResidualNS, f.OffsetNS)
	}
	for _, n := range res.Notes {
		t.Logf("  note: %s", n)
	}
}

func TestTargetsExplore2(t *testing.T) {
	p, _ := sim.Preset("linear-128")
	tg := [][2]float64{{-5e-3, 12e-3}, {0, 20e-3}, {6e-3, 30e-3}}
	for _, c := range []float64{1450, 1600} {
		a := simWires(t, p, acq.PlaneWaveSequence(&p, acq.SpreadAngles(5, 10), 1540), c, tg, 30, 35e-3, 2)
		ch, _ := recon.Prepare(a)
		t1 := time.Now()
		res, err := Targets(a, ch, TargetConfig{})
		logRes(t, "steered", res, err, time.Since(t1))
	}
	t0 := time.Now()
	sa := acq.SyntheticApertureSequence(&p)
	var ev []acq.Event
	for i := 0; i < len(sa); i += 4 {
		ev = append(ev, sa[i])
	}
	a := simWires(t, p, ev, 1450, tg, 30, 35e-3, 3)
	ch, _ := recon.Prepare(a)
	t1 := time.Now()
	res, err := Targets(a, ch, TargetConfig{})
	logRes(t, fmt.Sprintf("SA sim %v", t1.Sub(t0)), res, err, time.Since(t1))

	a = simWires(t, p, acq.PlaneWaveSequence(&p, []float64{0}, 1540), 1540, tg, 30, 35e-3, 4)
	a.StartTimeS += 200e-9
	ch, _ = recon.Prepare(a)
	t1 = time.Now()
	res, err = Targets(a, ch, TargetConfig{})
	logRes(t, "shifted, no offset", res, err, time.Since(t1))
	t1 = time.Now()
	res, err = Targets(a, ch, TargetConfig{FitOffset: true})
	logRes(t, "shifted, offset", res, err, time.Since(t1))

	s, err := acq.Load("../testdata/samples/wires-steered")
	if err != nil {
		t.Fatal(err)
	}
	ch, _ = recon.Prepare(s)
	t1 = time.Now()
	res, err = Targets(s, ch, TargetConfig{})
	logRes(t, "sample", res, err, time.Since(t1))
}
