package acq_test

import (
	"math"
	"strings"
	"testing"

	"celerity/acq"
)

func TestProbeElements(t *testing.T) {
	t.Parallel()
	const tol = 1e-15 // m; rounding of sub-metre coordinates

	t.Run("linear", func(t *testing.T) {
		t.Parallel()
		p := acq.NewLinear(5, 0.3e-3, 5e6)
		els := p.Elements()
		// x_k = (k - (N-1)/2) pitch, z = 0, normal +z.
		want := []float64{-0.6e-3, -0.3e-3, 0, 0.3e-3, 0.6e-3}
		for k, e := range els {
			if math.Abs(e.X-want[k]) > tol || e.Z != 0 || e.NX != 0 || e.NZ != 1 {
				t.Errorf("element %d: %+v", k, e)
			}
		}
		if a := p.Aperture(); math.Abs(a-1.2e-3) > tol {
			t.Errorf("aperture %g", a)
		}
		if m := p.MeanPitch(); math.Abs(m-0.3e-3) > tol {
			t.Errorf("mean pitch %g", m)
		}
		if w := p.Wavelength(1540); w != 1540/5e6 {
			t.Errorf("wavelength %g", w)
		}
	})

	t.Run("convex", func(t *testing.T) {
		t.Parallel()
		const r, pitch = 0.06, 0.5e-3
		p := acq.NewConvex(129, pitch, r, 3.5e6)
		els := p.Elements()
		for k, e := range els {
			// On the circle of radius R about (0, -R), normal pointing outwards.
			if d := math.Hypot(e.X, e.Z+r); math.Abs(d-r) > tol {
				t.Fatalf("element %d is %g m from the centre of curvature", k, d)
			}
			if math.Abs(e.NX-e.X/r) > 1e-12 || math.Abs(e.NZ-(e.Z+r)/r) > 1e-12 {
				t.Fatalf("element %d: normal (%g, %g) is not radial", k, e.NX, e.NZ)
			}
		}
		// The middle of the arc touches z = 0.
		if m := els[64]; m.X != 0 || m.Z != 0 || m.NZ != 1 {
			t.Errorf("middle element %+v", m)
		}
		// Derived: neighbours subtend pitch/R, so the chord is 2 R sin(pitch/(2R)).
		if m, want := p.MeanPitch(), 2*r*math.Sin(pitch/(2*r)); math.Abs(m-want) > 1e-15 {
			t.Errorf("mean pitch %g, want chord %g", m, want)
		}
		// Symmetric about x = 0.
		if math.Abs(els[0].X+els[128].X) > tol || els[0].Z != els[128].Z {
			t.Errorf("ends %+v, %+v", els[0], els[128])
		}
	})

	t.Run("explicit", func(t *testing.T) {
		t.Parallel()
		p := acq.Probe{Geometry: acq.Explicit, Positions: [][2]float64{{-1e-3, 0}, {0, 1e-4}, {2e-3, 0}}, CenterFrequencyHz: 5e6}
		els := p.Elements()
		if p.NumElements() != 3 || els[1].X != 0 || els[1].Z != 1e-4 || els[1].NZ != 1 {
			t.Errorf("elements %+v", els)
		}
		if a := p.Aperture(); a != 3e-3 {
			t.Errorf("aperture %g", a)
		}
		one := acq.Probe{Geometry: acq.Explicit, Positions: [][2]float64{{0, 0}}}
		if one.MeanPitch() != 0 || one.Aperture() != 0 {
			t.Error("single element: pitch or aperture not 0")
		}
	})
}

func TestProbeValidate(t *testing.T) {
	t.Parallel()
	ok := acq.NewLinear(4, 0.3e-3, 5e6)
	for _, c := range []struct {
		name string
		edit func(p *acq.Probe)
		want string // "" for valid
	}{
		{"valid", func(p *acq.Probe) {}, ""},
		{"zero frequency", func(p *acq.Probe) { p.CenterFrequencyHz = 0 }, "probe.center_frequency_hz"},
		{"NaN frequency", func(p *acq.Probe) { p.CenterFrequencyHz = math.NaN() }, "probe.center_frequency_hz"},
		{"Inf frequency", func(p *acq.Probe) { p.CenterFrequencyHz = math.Inf(1) }, "probe.center_frequency_hz"},
		{"NaN bandwidth", func(p *acq.Probe) { p.FractionalBandwidth = math.NaN() }, "probe.fractional_bandwidth"},
		{"NaN width", func(p *acq.Probe) { p.ElementWidthM = math.NaN() }, "probe.element_width_m"},
		{"no geometry", func(p *acq.Probe) { p.Geometry = 0 }, "exactly one of linear, convex or elements_m"},
		{"zero count", func(p *acq.Probe) { p.Count = 0 }, "probe.linear.count"},
		{"too many elements", func(p *acq.Probe) { p.Count = acq.MaxElements + 1 }, "probe.linear.count"},
		{"NaN pitch", func(p *acq.Probe) { p.PitchM = math.NaN() }, "probe.linear.pitch_m"},
		{"convex without radius", func(p *acq.Probe) { p.Geometry = acq.Convex }, "probe.convex.radius_m"},
		{"explicit without positions", func(p *acq.Probe) { p.Geometry = acq.Explicit }, "probe.elements_m"},
		{"explicit Inf", func(p *acq.Probe) {
			p.Geometry = acq.Explicit
			p.Positions = [][2]float64{{0, math.Inf(1)}}
		}, "probe.elements_m[0][1]"},
	} {
		p := ok
		c.edit(&p)
		err := p.Validate()
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.name, err)
		case c.want != "" && err == nil:
			t.Errorf("%s: valid", c.name)
		case c.want != "" && !strings.Contains(err.Error(), c.want):
			t.Errorf("%s: error %q does not contain %q", c.name, err, c.want)
		}
	}
}

func TestAcquisitionAccessors(t *testing.T) {
	t.Parallel()
	rng := newRNG()
	p := acq.NewLinear(3, 0.3e-3, 5e6)
	a := newAcq(rng, p, acq.RF, acq.PlaneWaveSequence(&p, []float64{-5, 5}, 1540), 10)
	a.StartTimeS = 1e-6
	ch := a.RFChannel(1, 2)
	if len(ch) != 10 || cap(ch) != 10 || &ch[0] != &a.RF[(1*3+2)*10] {
		t.Error("RFChannel does not alias the right samples")
	}
	if got := a.SampleTime(20); math.Abs(got-2e-6) > 1e-21 {
		t.Errorf("SampleTime(20) = %g, want 2 us", got)
	}
	if got := a.Duration(); math.Abs(got-0.5e-6) > 1e-21 {
		t.Errorf("Duration = %g", got)
	}
	b := newAcq(rng, p, acq.IQ, acq.PlaneWaveSequence(&p, []float64{0}, 1540), 4)
	if ch := b.IQChannel(0, 1); len(ch) != 4 || &ch[0] != &b.IQ[4] {
		t.Error("IQChannel does not alias the right samples")
	}
}

func TestValidateInMemory(t *testing.T) {
	t.Parallel()
	rng := newRNG()
	p := acq.NewLinear(3, 0.3e-3, 5e6)
	for _, c := range []struct {
		name string
		edit func(a *acq.Acquisition)
		want string
	}{
		{"no events", func(a *acq.Acquisition) { a.Events = nil }, "transmit: must hold between 1"},
		{"short delays", func(a *acq.Acquisition) { a.Events[0].Delays = a.Events[0].Delays[:2] }, "transmit.delays_file: event 0 has 2 delays"},
		{"short weights", func(a *acq.Acquisition) { a.Events[0].Weights = nil }, "transmit.weights_file: event 0 has 0 weights"},
		{"NaN weight", func(a *acq.Acquisition) { a.Events[0].Weights[1] = math.NaN() }, "transmit.weights_file: event 0 element 1"},
		{"no kind", func(a *acq.Acquisition) { a.Kind = 0 }, "channels.kind"},
		{"short RF", func(a *acq.Acquisition) { a.RF = a.RF[:5] }, "channels.file: holds 5 samples"},
		{"RF for IQ", func(a *acq.Acquisition) { a.Kind = acq.IQ }, "channels.file: holds 0 samples"},
		{"NaN demodulation", func(a *acq.Acquisition) { a.Kind = acq.IQ; a.DemodulationHz = math.NaN() }, "channels.demodulation_frequency_hz"},
		{"Inf start", func(a *acq.Acquisition) { a.StartTimeS = math.Inf(1) }, "start_time_s"},
		{"NaN speed", func(a *acq.Acquisition) { a.AssumedSpeedMPS = math.NaN() }, "assumed_speed_mps"},
		{"Inf sampling", func(a *acq.Acquisition) { a.SamplingRateHz = math.Inf(1) }, "sampling_rate_hz"},
		{"too many samples", func(a *acq.Acquisition) { a.NumSamples = acq.MaxSamples + 1 }, "channels.file: samples per channel"},
		{"negative label element", func(a *acq.Acquisition) { a.Events[0].Label = acq.SingleElementLabel(-1) }, "transmit.labels[0].single_element"},
	} {
		a := newAcq(rng, p, acq.RF, acq.PlaneWaveSequence(&p, []float64{-5, 5}, 1540), 4)
		c.edit(a)
		err := a.Validate()
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: got %v, want an error containing %q", c.name, err, c.want)
		}
	}
}
