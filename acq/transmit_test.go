package acq_test

import (
	"math"
	"slices"
	"testing"

	"celerity/acq"
)

const deg = math.Pi / 180

// sourceTol is the accepted error of a fitted virtual source from exact
// delays: the task asks for 1 micrometre.
const sourceTol = 1e-6 // m

func TestPlaneWaveDelaysSlope(t *testing.T) {
	t.Parallel()
	p := acq.NewLinear(128, 0.3e-3, 5e6)
	els := p.Elements()
	// Relative tolerance on the slope: neighbouring delays differ by about
	// 1e-7 s and carry rounding of about 1e-21 s.
	const relTol = 1e-9
	for _, c := range []float64{1450, 1540, 1600} {
		for _, th := range []float64{-30, -12, -0.5, 0, 3, 12, 30} {
			d := acq.PlaneWaveDelays(els, th*deg, c)
			// Derived: a plane wave at angle theta reaches x at x sin(theta)/c,
			// so d_i = x_i sin(theta)/c + const and the slope is sin(theta)/c.
			want := math.Sin(th*deg) / c
			lo := math.Inf(1)
			for k := range d {
				lo = math.Min(lo, d[k])
				if k == 0 {
					continue
				}
				slope := (d[k] - d[k-1]) / (els[k].X - els[k-1].X)
				if math.Abs(slope-want) > relTol*math.Max(math.Abs(want), 1/c) {
					t.Fatalf("c %g theta %g: slope between elements %d and %d is %g, want %g", c, th, k-1, k, slope, want)
				}
			}
			if lo != 0 || math.Signbit(lo) {
				t.Errorf("c %g theta %g: earliest delay %g, want +0", c, th, lo)
			}
			ev := acq.Event{Delays: d, Weights: make([]float64, len(d))}
			for k := range ev.Weights {
				ev.Weights[k] = 1
			}
			w := acq.FitPlane(els, &ev, c)
			if math.Abs(w.Slope-want) > relTol/c || math.Abs(w.Theta-th*deg) > 1e-9 || w.RMSResidual > 1e-18 {
				t.Errorf("c %g theta %g: FitPlane %+v", c, th, w)
			}
		}
	}
}

func TestDivergingAndFocusedDelays(t *testing.T) {
	t.Parallel()
	// Derived from the definitions: a diverging wave from V reaches element i
	// after |e_i - V|/c; focused delays are the time-reverse.
	p := acq.NewLinear(16, 0.3e-3, 5e6)
	els := p.Elements()
	v := [2]float64{2e-3, -15e-3}
	d := acq.DivergingDelays(els, v[0], v[1], 1540)
	f := acq.FocusedDelays(els, v[0], -v[1], 1540)
	near := math.Inf(1)
	for _, e := range els {
		near = math.Min(near, math.Hypot(e.X-v[0], e.Z-v[1]))
	}
	far := 0.0
	for _, e := range els {
		far = math.Max(far, math.Hypot(e.X-v[0], e.Z+v[1]))
	}
	for k, e := range els {
		if want := (math.Hypot(e.X-v[0], e.Z-v[1]) - near) / 1540; math.Abs(d[k]-want) > 1e-18 {
			t.Errorf("diverging delay %d: %g, want %g", k, d[k], want)
		}
		if want := (far - math.Hypot(e.X-v[0], e.Z+v[1])) / 1540; math.Abs(f[k]-want) > 1e-18 {
			t.Errorf("focused delay %d: %g, want %g", k, f[k], want)
		}
	}
}

func TestFitVirtualSource(t *testing.T) {
	t.Parallel()
	linear := acq.NewLinear(128, 0.3e-3, 5e6)
	convex := acq.NewConvex(128, 0.5e-3, 0.06, 3.5e6)
	small := acq.NewLinear(32, 0.2e-3, 7.5e6)
	for _, c := range []struct {
		name  string
		p     acq.Probe
		v     [2]float64
		focus bool
		speed float64
	}{
		{"linear diverging (2, -15) mm", linear, [2]float64{2e-3, -15e-3}, false, 1540},
		{"linear focus (-3, 25) mm", linear, [2]float64{-3e-3, 25e-3}, true, 1540},
		{"linear diverging (0, -5) mm", linear, [2]float64{0, -5e-3}, false, 1540},
		{"linear diverging (-10, -40) mm", linear, [2]float64{-10e-3, -40e-3}, false, 1480},
		{"linear focus (5, 60) mm", linear, [2]float64{5e-3, 60e-3}, true, 1540},
		{"linear focus (0, 8) mm", linear, [2]float64{0, 8e-3}, true, 1600},
		{"small focus off the aperture (8, 20) mm", small, [2]float64{8e-3, 20e-3}, true, 1540},
		{"convex diverging (2, -15) mm", convex, [2]float64{2e-3, -15e-3}, false, 1540},
		{"convex focus (-3, 25) mm", convex, [2]float64{-3e-3, 25e-3}, true, 1540},
	} {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			els := c.p.Elements()
			var d []float64
			want := acq.KindDiverging
			if c.focus {
				d = acq.FocusedDelays(els, c.v[0], c.v[1], c.speed)
				want = acq.KindFocused
			} else {
				d = acq.DivergingDelays(els, c.v[0], c.v[1], c.speed)
			}
			ev := acq.Event{Delays: d, Weights: slices.Repeat([]float64{1}, len(d))}
			for _, w := range []acq.Wavefront{
				acq.FitVirtualSource(els, &ev, c.speed),
				acq.DeriveWavefront(els, &ev, c.speed, 0, c.p.CenterFrequencyHz),
			} {
				if w.Kind != want {
					t.Errorf("%v, want %v", w, want)
				}
				if e := math.Hypot(w.VX-c.v[0], w.VZ-c.v[1]); e > sourceTol {
					t.Errorf("source (%.6f, %.6f) mm is %.3g um from the true one", w.VX*1e3, w.VZ*1e3, e*1e6)
				}
				if w.C != c.speed || w.RMSResidual > 1e-12 {
					t.Errorf("speed %g, residual %g s", w.C, w.RMSResidual)
				}
			}
		})
	}
}

func TestSequenceKinds(t *testing.T) {
	t.Parallel()
	p := acq.NewLinear(64, 0.3e-3, 5e6)
	els := p.Elements()

	t.Run("synthetic aperture", func(t *testing.T) {
		t.Parallel()
		seq := acq.SyntheticApertureSequence(&p)
		if len(seq) != 64 {
			t.Fatalf("%d events, want 64", len(seq))
		}
		for i := range seq {
			if f := seq[i].Firing(); !slices.Equal(f, []int{i}) {
				t.Errorf("event %d fires %v", i, f)
			}
			w := acq.DeriveWavefront(els, &seq[i], 1540, 0, p.CenterFrequencyHz)
			if w.Kind != acq.KindSingleElement || w.Element != i || w.VX != els[i].X {
				t.Errorf("event %d: %v", i, w)
			}
		}
	})

	t.Run("focused sub-apertures", func(t *testing.T) {
		t.Parallel()
		xs := []float64{-8e-3, -2e-3, 0, 3.3e-3, 9e-3}
		const fz, fnum = 25e-3, 2.0
		seq := acq.FocusedSequence(&p, xs, fz, fnum, 1540)
		for i := range seq {
			// F-number 2 at 25 mm: a 12.5 mm sub-aperture, about 41 elements,
			// fewer where it runs off the 19 mm array.
			nf := len(seq[i].Firing())
			if nf < 20 || nf > 42 {
				t.Errorf("event %d fires %d elements", i, nf)
			}
			for k, e := range els {
				if inside := math.Abs(e.X-xs[i]) <= fz/fnum/2; inside != (seq[i].Weights[k] != 0) {
					t.Fatalf("event %d element %d at %g mm: weight %g", i, k, e.X*1e3, seq[i].Weights[k])
				}
			}
			w := acq.DeriveWavefront(els, &seq[i], 1540, 0, p.CenterFrequencyHz)
			if w.Kind != acq.KindFocused || math.Hypot(w.VX-xs[i], w.VZ-fz) > sourceTol {
				t.Errorf("event %d: %v, want a focus at (%g, %g) mm", i, w, xs[i]*1e3, fz*1e3)
			}
		}
		// A sub-aperture narrower than the pitch keeps the nearest element.
		seq = acq.FocusedSequence(&p, []float64{0.1e-3}, fz, 1e4, 1540)
		if f := seq[0].Firing(); len(f) != 1 || f[0] != 32 {
			t.Errorf("narrow sub-aperture fires %v, want [32]", f)
		}
		// fnumber <= 0: the full aperture.
		seq = acq.FocusedSequence(&p, []float64{0}, fz, 0, 1540)
		if n := len(seq[0].Firing()); n != 64 {
			t.Errorf("full aperture fires %d elements", n)
		}
	})
}

func TestDeriveWavefrontAtOtherSpeeds(t *testing.T) {
	t.Parallel()
	p := acq.NewLinear(128, 0.3e-3, 5e6)
	els := p.Elements()
	for _, th := range []float64{-20, -5, 0, 7, 15} {
		ev := acq.PlaneWaveSequence(&p, []float64{th}, 1540)[0]
		for _, c := range []float64{1400, 1480, 1540, 1620} {
			w := acq.DeriveWavefront(els, &ev, c, 0, p.CenterFrequencyHz)
			// Derived: slope = sin(theta0)/c0, so sin(theta) = c sin(theta0)/c0.
			want := math.Asin(c * math.Sin(th*deg) / 1540)
			if w.Kind != acq.KindPlaneWave || math.Abs(w.Theta-want) > 1e-9 || w.C != c {
				t.Errorf("theta0 %g at c %g: %v, want %.6f deg", th, c, w, want/deg)
			}
		}
	}
	// Steep steering at a faster assumed speed is evanescent: sin > 1.
	ev := acq.PlaneWaveSequence(&p, []float64{70}, 1540)[0]
	if w := acq.DeriveWavefront(els, &ev, 1700, 0, p.CenterFrequencyHz); w.Kind == acq.KindPlaneWave {
		t.Errorf("70 deg at 1540 m/s derived at 1700 m/s: %v, want no plane wave", w)
	}
}

func TestLabelNeverOverridesDelays(t *testing.T) {
	t.Parallel()
	p := acq.NewLinear(64, 0.3e-3, 5e6)
	els := p.Elements()
	ev := acq.PlaneWaveSequence(&p, []float64{5}, 1540)[0]
	ev.Label = acq.PlaneWaveLabel(20)
	w := acq.DeriveWavefront(els, &ev, 1540, 0, p.CenterFrequencyHz)
	if math.Abs(w.Theta/deg-5) > 1e-9 {
		t.Errorf("derived %v from delays for 5 deg labelled 20 deg", w)
	}
	ev.Label = acq.SingleElementLabel(3)
	if w := acq.DeriveWavefront(els, &ev, 1540, 0, p.CenterFrequencyHz); w.Kind != acq.KindPlaneWave {
		t.Errorf("single-element label changed the kind: %v", w)
	}
}

func TestSummarize(t *testing.T) {
	t.Parallel()
	rng := newRNG()
	p := acq.NewLinear(64, 0.3e-3, 5e6)
	angles := acq.SpreadAngles(7, 15)
	rev := slices.Clone(angles)
	slices.Reverse(rev) // Summarize sorts the angles
	evs := acq.PlaneWaveSequence(&p, rev, 1540)
	evs = append(evs, acq.DivergingSequence(&p, [][2]float64{{2e-3, -15e-3}}, 1540)...)
	evs = append(evs, acq.FocusedSequence(&p, []float64{-3e-3}, 25e-3, 0, 1540)...)
	evs = append(evs, acq.SyntheticApertureSequence(&p)[5])
	a := newAcq(rng, p, acq.RF, evs, 4)
	s := acq.Summarize(a)
	want := map[acq.TransmitKind]int{acq.KindPlaneWave: 7, acq.KindDiverging: 1, acq.KindFocused: 1, acq.KindSingleElement: 1}
	for k, n := range want {
		if s.Counts[k] != n {
			t.Errorf("%v: %d events, want %d", k, s.Counts[k], n)
		}
	}
	if len(s.AnglesDeg) != len(angles) {
		t.Fatalf("angles %v, want %v", s.AnglesDeg, angles)
	}
	for i := range angles { // sorted ascending, like angles
		if math.Abs(s.AnglesDeg[i]-angles[i]) > 1e-9 {
			t.Errorf("angle %d: %g, want %g", i, s.AnglesDeg[i], angles[i])
		}
	}
	if len(s.Sources) != 2 || math.Hypot(s.Sources[0][0]-2e-3, s.Sources[0][1]+15e-3) > sourceTol ||
		math.Hypot(s.Sources[1][0]+3e-3, s.Sources[1][1]-25e-3) > sourceTol {
		t.Errorf("sources %v", s.Sources)
	}
}

func TestSpreadAngles(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		n    int
		max  float64
		want []float64
	}{
		{0, 10, []float64{0}},
		{1, 10, []float64{0}},
		{2, 10, []float64{-10, 10}},
		{5, 10, []float64{-10, -5, 0, 5, 10}},
	} {
		if got := acq.SpreadAngles(c.n, c.max); !slices.Equal(got, c.want) {
			t.Errorf("SpreadAngles(%d, %g) = %v, want %v", c.n, c.max, got, c.want)
		}
	}
}

func TestFitTolerance(t *testing.T) {
	t.Parallel()
	// A hundredth of a period, at least 1 ns.
	if got := acq.FitTolerance(5e6); math.Abs(got-2e-9) > 1e-24 {
		t.Errorf("5 MHz: %g", got)
	}
	if got := acq.FitTolerance(50e6); got != 1e-9 {
		t.Errorf("50 MHz: %g", got)
	}
}

func TestStrings(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ got, want string }{
		{acq.RF.String(), "rf"},
		{acq.IQ.String(), "iq"},
		{acq.DataKind(0).String(), "unknown"},
		{acq.Linear.String(), "linear"},
		{acq.Convex.String(), "convex"},
		{acq.Explicit.String(), "explicit"},
		{acq.Geometry(0).String(), "unknown"},
		{acq.PlaneWaveLabel(-10).String(), "plane wave -10 deg"},
		{acq.VirtualSourceLabel(0.002, -0.015).String(), "virtual source (2, -15) mm"},
		{acq.SingleElementLabel(7).String(), "single element 7"},
		{acq.Label{}.String(), ""},
		{acq.KindPlaneWave.String(), "plane wave"},
		{acq.KindDiverging.String(), "diverging wave"},
		{acq.KindFocused.String(), "focused beam"},
		{acq.KindSingleElement.String(), "single element"},
		{acq.KindUnknown.String(), "unknown"},
		{acq.Wavefront{Kind: acq.KindPlaneWave, Theta: 12 * deg}.String(), "plane wave 12.00 deg"},
		{acq.Wavefront{Kind: acq.KindDiverging, VX: 2e-3, VZ: -15e-3}.String(), "diverging wave from (2.00, -15.00) mm"},
		{acq.Wavefront{Kind: acq.KindFocused, VX: -3e-3, VZ: 25e-3}.String(), "focused beam at (-3.00, 25.00) mm"},
		{acq.Wavefront{Kind: acq.KindSingleElement, Element: 4}.String(), "single element 4"},
		{acq.Wavefront{}.String(), "unknown wavefront"},
	} {
		if c.got != c.want {
			t.Errorf("got %q, want %q", c.got, c.want)
		}
	}
}

// TestCompoundedWaves: three or more plane or diverging waves; not fewer,
// not synthetic aperture or focused beams, not an index out of range.
func TestCompoundedWaves(t *testing.T) {
	t.Parallel()
	p := acq.NewLinear(64, 0.3e-3, 5e6)
	mk := func(evs []acq.Event) *acq.Acquisition {
		return &acq.Acquisition{Probe: p, AssumedSpeedMPS: 1540, Events: evs}
	}
	pw := mk(acq.PlaneWaveSequence(&p, acq.SpreadAngles(5, 8), 1540))
	dw := mk(acq.DivergingSequence(&p, [][2]float64{{-3e-3, -8e-3}, {0, -8e-3}, {3e-3, -8e-3}}, 1540))
	sa := mk(acq.SyntheticApertureSequence(&p))
	fb := mk(acq.FocusedSequence(&p, []float64{-2e-3, 0, 2e-3}, 20e-3, 2, 1540))
	for _, tc := range []struct {
		name   string
		a      *acq.Acquisition
		events []int
		want   bool
	}{
		{"5 plane waves", pw, nil, true},
		{"3 of them", pw, []int{0, 2, 4}, true},
		{"2 of them", pw, []int{0, 4}, false},
		{"index out of range", pw, []int{0, 2, 5}, false},
		{"3 diverging waves", dw, nil, true},
		{"synthetic aperture", sa, nil, false},
		{"focused beams", fb, nil, false},
	} {
		if got := acq.CompoundedWaves(tc.a, tc.events); got != tc.want {
			t.Errorf("%s: %v, want %v", tc.name, got, tc.want)
		}
	}
}
