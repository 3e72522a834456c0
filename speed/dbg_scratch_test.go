package speed

import (
	"celerity/sim"
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"celerity/acq"
	"celerity/recon"
)

func TestDbgSample(t *testing.T) {
	s, _ := acq.Load("../testdata/samples/wires-steered")
	ch, _ := recon.Prepare(s)
	cfg := TargetConfig{}
	cfg.defaults(s, ch)
	f := newTargetFitter(s, ch, &cfg)
	for _, q := range [][2]float64{{-3e-3, 12e-3}, {0, 20e-3}, {4e-3, 30e-3}} {
		p := tgtParams{q[0], q[1], 1450, 0}
		obs := f.measure(p)
		fr := f.fit(obs, p)
		t.Logf("fit %+v", fr)
		tm := f.model()
		for e := range 3 {
			line := ""
			for _, o := range obs {
				if o.ev != e {
					continue
				}
				tt, _ := tm.time(fr.p, o.ev, o.el)
				line += fmt.Sprintf("%d:%.1f/%.0f ", o.el, (o.t-tt)*1e9, o.w)
			}
			t.Log(e, line)
		}
	}
}

func TestDbgDelays(t *testing.T) {
	s, _ := acq.Load("../testdata/samples/wires-steered")
	for e := range 3 {
		t.Logf("%v", s.Events[e].Delays[:5])
		w := acq.DeriveWavefront(s.Probe.Elements(), &s.Events[e], 1450, 0, 5e6)
		t.Logf("%v rms %.3g", w, w.RMSResidual)
	}
	t.Logf("%+v", s.Probe)
}

func TestDbgPerEvent(t *testing.T) {
	s, _ := acq.Load("../testdata/samples/wires-steered")
	ch, _ := recon.Prepare(s)
	for _, off := range []bool{false, true} {
		for e := range 3 {
			cfg := TargetConfig{Events: []int{e}, FitOffset: off}
			cfg.defaults(s, ch)
			f := newTargetFitter(s, ch, &cfg)
			for _, q := range [][2]float64{{-3e-3, 12e-3}, {0, 20e-3}, {4e-3, 30e-3}} {
				p := tgtParams{q[0], q[1], 1450, 0}
				var fr tgtFitResult
				for range 3 {
					obs := f.measure(p)
					fr = f.fit(obs, p)
					p = fr.p
				}
				t.Logf("off %v ev %d: x %.4f z %.4f c %.3f se %.3f off %.2f rms %.3f n %d", off, e, fr.p[0]*1e3, fr.p[1]*1e3, fr.p[2], fr.se, fr.p[3]*1e9, fr.rmsNS, fr.n)
			}
		}
	}
}

func TestDbgCombined(t *testing.T) {
	s, _ := acq.Load("../testdata/samples/wires-steered")
	ch, _ := recon.Prepare(s)
	cfg := TargetConfig{}
	cfg.defaults(s, ch)
	f := newTargetFitter(s, ch, &cfg)
	p := tgtParams{-3e-3, 12e-3, 1450, 0}
	obs := f.measure(p)
	tm := f.model()
	for e := range 3 {
		line := ""
		for _, o := range obs {
			if o.ev != e || o.el%8 != 0 {
				continue
			}
			tt, _ := tm.time(p, o.ev, o.el)
			line += fmt.Sprintf("%d:%.2f ", o.el, (o.t-tt)*1e9)
		}
		t.Log(e, line)
	}
	fr := f.lm(tm, obs, p, 3)
	t.Logf("%+v", fr)
}

func TestDbgSpeckle(t *testing.T) {
	p, _ := sim.Preset("linear-128")
	p.Count = 64
	rng := rand.New(rand.NewPCG(7, 8))
	pulse := sim.Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}
	lat, ax := sim.ResolutionCell(pulse, 1540)
	sc, _ := sim.Speckle(rng, sim.Region{X0: -10e-3, X1: 10e-3, Z0: 4e-3, Z1: 30e-3}, 5, lat*ax)
	snr := 30.0
	t0 := time.Now()
	cfg := &sim.Config{Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540), AssumedSpeedMPS: 1540, SamplingRateHz: 20e6,
		NumSamples: 900, Medium: sim.Homogeneous(1540), Scatterers: sc, NoiseSNRDB: &snr, Seed: 1}
	a, err := sim.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	ch, _ := recon.Prepare(a)
	t1 := time.Now()
	res, err := Targets(a, ch, TargetConfig{})
	logRes(t, fmt.Sprintf("speckle %d scat sim %v", len(sc), t1.Sub(t0)), res, err, time.Since(t1))
	cfg.Scatterers = append(cfg.Scatterers, sim.Scatterer{X: 1e-3, Z: 18e-3, Amp: 100})
	a, _ = sim.Simulate(cfg)
	ch, _ = recon.Prepare(a)
	t1 = time.Now()
	res, err = Targets(a, ch, TargetConfig{})
	logRes(t, "speckle+wire", res, err, time.Since(t1))
}

func TestDbgIQ(t *testing.T) {
	p, _ := sim.Preset("linear-128")
	tg := [][2]float64{{-5e-3, 12e-3}, {0, 20e-3}, {6e-3, 30e-3}}
	a := simWires(t, p, acq.PlaneWaveSequence(&p, []float64{0}, 1540), 1480, tg, 30, 35e-3, 1)
	q, err := sim.ToIQ(a, 4.5e6)
	if err != nil {
		t.Fatal(err)
	}
	// decimate by 2
	n := q.NumSamples / 2
	iq := make([]complex64, 0, q.NumEvents()*q.NumElements()*n)
	for e := range q.NumEvents() {
		for j := range q.NumElements() {
			row := q.IQChannel(e, j)
			for k := range n {
				iq = append(iq, row[2*k])
			}
		}
	}
	q.IQ, q.NumSamples, q.SamplingRateHz = iq, n, q.SamplingRateHz/2
	ch, err := recon.Prepare(q)
	if err != nil {
		t.Fatal(err)
	}
	t1 := time.Now()
	res, err := Targets(q, ch, TargetConfig{})
	logRes(t, "iq", res, err, time.Since(t1))
}
