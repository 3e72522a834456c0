package recon_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"celerity/acq"
	"celerity/recon"
	"celerity/sim"
)

// benchCase is the benchmark's acquisition: a 128-element linear array,
// ne plane waves over +/-12 degrees, random RF (the work does not depend on
// the content), recorded deep enough for every pixel of a 200 x 200 grid
// (20 x 20 mm at 0.1 mm from 10 mm deep) to lie inside the record for
// every element.
func benchCase(tb testing.TB, ne int) (*acq.Acquisition, recon.Grid) {
	tb.Helper()
	p, err := sim.Preset("linear-128")
	if err != nil {
		tb.Fatal(err)
	}
	evs := acq.PlaneWaveSequence(&p, acq.SpreadAngles(ne, 12), c1540)
	const ns = 1600 // 80 us; the latest echo any pixel needs arrives by about 50 us
	a := &acq.Acquisition{Probe: p, SamplingRateHz: fsHz, AssumedSpeedMPS: c1540, Kind: acq.RF, Events: evs,
		NumSamples: ns, RF: make([]float32, ne*p.Count*ns)}
	rng := rand.New(rand.NewPCG(1, 2))
	for i := range a.RF {
		a.RF[i] = float32(rng.NormFloat64())
	}
	g, err := recon.NewRect(-0.00995, 0.00995, 0.1e-3, 0.010, 0.02995, 0.1e-3)
	if err != nil {
		tb.Fatal(err)
	}
	if g.Rows != 200 || g.Cols != 200 {
		tb.Fatalf("grid %d x %d, want 200 x 200", g.Rows, g.Cols)
	}
	return a, g
}

// benchConfig: F-number 0 and no directivity cut-off, so that every element
// takes part for every pixel and the nominal count px x el x ev is the work
// done; linear interpolation.
var benchConfig = recon.Config{FNumber: 0, MaxAngleDeg: -1, Interp: recon.Linear}

// referenceForm is the plain delay-and-sum the tiled beamformer must equal:
// for each pixel, event and element it computes the delays directly from
// the plane wave derived from the firing delays at speed c,
//
//	tau_tx = T0 + (x sin(theta) + z cos(theta)) / c,  tau_rx = |p - e_j| / c,
//
// interpolates the baseband linearly at tau_tx + tau_rx, rotates it by
// exp(j 2 pi fd (tau_tx + tau_rx)) and accumulates (full aperture, unit
// weights). Single goroutine, no tables.
func referenceForm(dst []complex64, a *acq.Acquisition, ch *recon.Channels, g *recon.Grid, c float64) []complex64 {
	els := a.Probe.Elements()
	fronts := make([]acq.Wavefront, a.NumEvents())
	for e := range fronts {
		fronts[e] = acq.DeriveWavefront(els, &a.Events[e], c, 0, a.Probe.CenterFrequencyHz)
	}
	for p := range g.Len() {
		x, z := g.PX[p], g.PZ[p]
		var acc complex128
		for e, f := range fronts {
			tx := f.T0 + (x*math.Sin(f.Theta)+z*math.Cos(f.Theta))/c
			for j, el := range els {
				rx := math.Sqrt((x-el.X)*(x-el.X)+(z-el.Z)*(z-el.Z)) / c
				tau := tx + rx
				s := (tau - ch.T0) * ch.FS
				row := ch.Row(e, j)
				if !(s >= 0 && s < float64(len(row)-1)) {
					continue
				}
				i := int(s)
				fr := s - float64(i)
				v := complex128(row[i])*complex(1-fr, 0) + complex128(row[i+1])*complex(fr, 0)
				sn, cs := math.Sincos(2 * math.Pi * ch.FD * tau)
				acc += v * complex(cs, sn)
			}
		}
		dst[p] = complex64(acc)
	}
	return dst
}

// TestReferenceKernel: the tiled, table-driven beamformer equals the plain
// reference within float32 rounding (delays held as float32 sample
// indices near 1500 resolve 1e-4 sample; with a 2 MHz baseband band at
// 20 MHz that is a phase error of about 1e-4 rad, well inside rel).
func TestReferenceKernel(t *testing.T) {
	t.Parallel()
	a, _ := benchCase(t, 3)
	g, err := recon.NewRect(-0.006, 0.006, 0.4e-3, 0.012, 0.026, 0.4e-3)
	if err != nil {
		t.Fatal(err)
	}
	for _, iq := range []bool{false, true} {
		b := a
		if iq {
			if b, err = sim.ToIQ(a, 4.5e6); err != nil {
				t.Fatal(err)
			}
		}
		ch, err := recon.Prepare(b)
		if err != nil {
			t.Fatal(err)
		}
		bf, err := recon.NewBeamformer(b, &g, recon.NewHomogeneous(1500, b.Probe.Elements()), benchConfig)
		if err != nil {
			t.Fatal(err)
		}
		got, err := bf.Form(nil, ch)
		if err != nil {
			t.Fatal(err)
		}
		want := referenceForm(make([]complex64, g.Len()), b, ch, &g, 1500)
		// rel: float32 tables and sums over 384 terms, relative to the
		// image's rms (random data: no pixel is special)
		const rel = 1e-4
		var num, den float64
		for i := range got {
			d := got[i] - want[i]
			num += float64(real(d)*real(d) + imag(d)*imag(d))
			den += float64(real(want[i])*real(want[i]) + imag(want[i])*imag(want[i]))
		}
		if r := math.Sqrt(num / den); !(r <= rel) {
			t.Errorf("iq %v: Form differs from the reference by %.3g rms (relative)", iq, r)
		} else {
			t.Logf("iq %v: relative rms difference %.2g", iq, r)
		}
	}
}

// BenchmarkForm reports delay-and-sum throughput in pixel x element x event
// per second for RF-prepared and IQ input, beside the plain reference
// kernel, so that the speed-up is a ratio measured in one run.
func BenchmarkForm(b *testing.B) {
	for _, ne := range []int{8, 16} {
		a, g := benchCase(b, ne)
		iq, err := sim.ToIQ(a, a.Probe.CenterFrequencyHz)
		if err != nil {
			b.Fatal(err)
		}
		work := float64(g.Len() * a.NumElements() * ne)
		for _, in := range []struct {
			name string
			a    *acq.Acquisition
		}{{"rf", a}, {"iq", iq}} {
			ch, err := recon.Prepare(in.a)
			if err != nil {
				b.Fatal(err)
			}
			bf, err := recon.NewBeamformer(in.a, &g, recon.NewHomogeneous(c1540, a.Probe.Elements()), benchConfig)
			if err != nil {
				b.Fatal(err)
			}
			b.Run(fmt.Sprintf("events=%d/%s/fast", ne, in.name), func(b *testing.B) {
				dst := make([]complex64, g.Len())
				n := 0
				c0 := cpuSeconds()
				for b.Loop() {
					if _, err := bf.Form(dst, ch); err != nil {
						b.Fatal(err)
					}
					n++
				}
				reportRate(b, work*float64(n), cpuSeconds()-c0)
			})
			if in.name == "rf" {
				b.Run(fmt.Sprintf("events=%d/%s/reference", ne, in.name), func(b *testing.B) {
					dst := make([]complex64, g.Len())
					n := 0
					c0 := cpuSeconds()
					for b.Loop() {
						referenceForm(dst, in.a, ch, &g, c1540)
						n++
					}
					reportRate(b, work*float64(n), cpuSeconds()-c0)
				})
			}
		}
	}
}

// reportRate reports work per wall-clock second (the domain metric) and per
// CPU-second of the whole process: on a machine shared with other jobs the
// first drops with the load, the second much less; on an idle machine the
// wall rate approaches the CPU rate times the number of workers.
func reportRate(b *testing.B, work, cpu float64) {
	b.ReportMetric(work/b.Elapsed().Seconds(), "px·el·ev/s")
	b.ReportMetric(work/cpu, "px·el·ev/cpu·s")
}

// BenchmarkNewBeamformer: building the delay tables of the benchmark case.
func BenchmarkNewBeamformer(b *testing.B) {
	for _, ne := range []int{8, 16} {
		a, g := benchCase(b, ne)
		b.Run(fmt.Sprintf("events=%d", ne), func(b *testing.B) {
			n := 0
			c0 := cpuSeconds()
			for b.Loop() {
				if _, err := recon.NewBeamformer(a, &g, recon.NewHomogeneous(c1540, a.Probe.Elements()), benchConfig); err != nil {
					b.Fatal(err)
				}
				n++
			}
			reportRate(b, float64(g.Len()*a.NumElements()*ne*n), cpuSeconds()-c0)
		})
	}
}
