package recon_test

import (
	"math"
	"strings"
	"testing"

	"celerity/acq"
	"celerity/recon"
)

// denseProbe is a linear array with a fine pitch (0.02 mm), so that the
// first arrival of the wavelets of its elements approximates the continuous
// wavefront to a few picoseconds: the discrete minimum over elements of
// d(x) + r(x)/c misses the stationary value by at most
// (pitch/2)^2 / (2 r c) = 1.6e-12 s at r = 20 mm.
func denseProbe() acq.Probe {
	return acq.Probe{Geometry: acq.Linear, Count: 1001, PitchM: 0.02e-3, CenterFrequencyHz: 5e6}
}

// huygens returns the stationary value over the firing elements of
// d_i + |p - e_i| / c (the first arrival, or with wantMax the last) and the
// position of that element: the wave the firing delays launch, from
// Huygens' principle, without any wave model.
func huygens(els []acq.Element, ev *acq.Event, c, x, z float64, wantMax bool) (t, xs float64) {
	t = math.Inf(1)
	if wantMax {
		t = math.Inf(-1)
	}
	for i, e := range els {
		if ev.Weights[i] == 0 {
			continue
		}
		v := ev.Delays[i] + math.Hypot(x-e.X, z-e.Z)/c
		if (!wantMax && v < t) || (wantMax && v > t) {
			t, xs = v, e.X
		}
	}
	return t, xs
}

// TestHomogeneousTransmitHuygens checks the closed-form transmit times of
// the homogeneous model (plane, diverging and focused waves derived from the
// firing delays) against the Huygens first arrival over a dense array, at
// the speed the delays were computed for and at another one.
func TestHomogeneousTransmitHuygens(t *testing.T) {
	t.Parallel()
	p := denseProbe()
	els := p.Elements()
	pw := func(deg, c float64) acq.Event {
		return acq.PlaneWaveSequence(&p, []float64{deg}, c)[0]
	}
	div := acq.DivergingSequence(&p, [][2]float64{{0.002, -0.008}}, c1540)[0]
	foc := acq.FocusedSequence(&p, []float64{-0.001}, 0.015, 0, c1540)[0]
	// Tolerances. Closed forms of delays computed at the model's speed:
	// the dense array's discretisation (1.6 ps, above) plus rounding.
	// Plane waves fired for 1540 m/s but seen at 1450 m/s are still exactly
	// linear in x, so the derived angle is exact too.
	const exactTol = 0.01e-9 // s
	const xsTol = 0.05e-3    // m: the stationary element, within a few pitches
	cases := []struct {
		name    string
		ev      acq.Event
		c       float64
		kind    acq.TransmitKind
		pts     [][2]float64 // stationary points must lie on the array
		wantMax bool
	}{
		{"plane 0 deg", pw(0, c1540), c1540, acq.KindPlaneWave, [][2]float64{{0, 0.01}, {0.004, 0.03}, {-0.006, 0.02}}, false},
		{"plane -15 deg", pw(-15, c1540), c1540, acq.KindPlaneWave, [][2]float64{{0, 0.01}, {-0.004, 0.02}, {-0.002, 0.012}}, false},
		{"plane 12 deg fired for 1540, medium 1450", pw(12, c1540), 1450, acq.KindPlaneWave, [][2]float64{{0.003, 0.02}, {0, 0.015}}, false},
		{"plane -20 deg fired for 1480, medium 1600", pw(-20, 1480), 1600, acq.KindPlaneWave, [][2]float64{{-0.002, 0.015}, {0.001, 0.01}}, false},
		{"diverging", div, c1540, acq.KindDiverging, [][2]float64{{0.002, 0.01}, {-0.005, 0.02}, {0.008, 0.005}}, false},
		{"focused, before the focus", foc, c1540, acq.KindFocused, [][2]float64{{-0.001, 0.005}, {0.002, 0.01}}, false},
		{"focused, beyond the focus", foc, c1540, acq.KindFocused, [][2]float64{{-0.001, 0.025}, {0.001, 0.03}}, true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			m := recon.NewHomogeneous(tc.c, els)
			w := recon.NewWave(m, &tc.ev, p.CenterFrequencyHz)
			if w.Front.Kind != tc.kind {
				t.Fatalf("wavefront %v, want %v", w.Front, tc.kind)
			}
			for _, q := range tc.pts {
				got, xs := m.Transmit(w, q[0], q[1])
				want, wxs := huygens(els, &tc.ev, tc.c, q[0], q[1], tc.wantMax)
				if math.Abs(got-want) > exactTol {
					t.Errorf("(%g, %g) mm: transmit %.6f us, Huygens %.6f us (diff %.3g ns)", q[0]*1e3, q[1]*1e3, got*1e6, want*1e6, (got-want)*1e9)
				}
				if math.Abs(xs-wxs) > xsTol {
					t.Errorf("(%g, %g) mm: stationary element at %.4f mm, Huygens %.4f mm", q[0]*1e3, q[1]*1e3, xs*1e3, wxs*1e3)
				}
			}
		})
	}
}

// TestTransmitSingleElement: a single-element event's wave is that
// element's own wavelet, t = d_k + |p - e_k| / c (derived).
func TestTransmitSingleElement(t *testing.T) {
	t.Parallel()
	p := probeN(t, 16)
	els := p.Elements()
	m := recon.NewHomogeneous(1500, els)
	for _, k := range []int{0, 7, 15} {
		ev := acq.SyntheticApertureSequence(&p)[k]
		ev.Delays[k] = 1.5e-6 // a firing delay is added, not ignored
		w := recon.NewWave(m, &ev, p.CenterFrequencyHz)
		got, xs := m.Transmit(w, 0.001, 0.02)
		want := 1.5e-6 + math.Hypot(0.001-els[k].X, 0.02)/1500
		if math.Abs(got-want) > 1e-15 || xs != els[k].X {
			t.Errorf("element %d: (%.9g s, %g m), want (%.9g s, %g m)", k, got, xs, want, els[k].X)
		}
	}
}

// TestNewWaveDerivesAngle: a plane wave fired for angle theta0 at speed c0
// has delays of slope sin(theta0)/c0, so a beamformer assuming c sees the
// angle asin(c sin(theta0) / c0) (derived; FORMAT.md and the sample README).
func TestNewWaveDerivesAngle(t *testing.T) {
	t.Parallel()
	p := probeN(t, 64)
	els := p.Elements()
	const angleTol = 1e-9 // rad: a least-squares line through exact delays
	for _, tc := range []struct{ deg, c0, c float64 }{
		{12, 1540, 1450}, {-12, 1540, 1450}, {0, 1540, 1600}, {20, 1500, 1540}, {-7, 1540, 1540},
	} {
		ev := acq.PlaneWaveSequence(&p, []float64{tc.deg}, tc.c0)[0]
		w := recon.NewWave(recon.NewHomogeneous(tc.c, els), &ev, p.CenterFrequencyHz)
		want := math.Asin(tc.c * math.Sin(tc.deg*math.Pi/180) / tc.c0)
		if w.Front.Kind != acq.KindPlaneWave || math.Abs(w.Front.Theta-want) > angleTol {
			t.Errorf("%g deg fired for %g m/s, seen at %g m/s: %v, want %.4f deg", tc.deg, tc.c0, tc.c, w.Front, want*180/math.Pi)
		}
	}
}

// TestCorrected checks the per-element corrections: added to every receive
// path into element j, and to the transmit path at the stationary element,
// interpolated linearly between elements and held beyond the ends.
func TestCorrected(t *testing.T) {
	t.Parallel()
	p := probeN(t, 8)
	els := p.Elements()
	base := recon.NewHomogeneous(c1540, els)
	prof := []float64{10e-9, -20e-9, 30e-9, 0, 5e-9, -5e-9, 40e-9, -40e-9}
	c, err := recon.NewCorrected(base, prof)
	if err != nil {
		t.Fatal(err)
	}
	const tol = 1e-18 // s: one float64 addition of microsecond times
	for j := range els {
		got := c.Receive(j, 0.001, 0.01)
		want := base.Receive(j, 0.001, 0.01) + prof[j]
		if math.Abs(got-want) > tol {
			t.Errorf("receive %d: %g, want %g", j, got, want)
		}
	}
	// At: exact at elements, linear between, held beyond the ends.
	pitch := p.PitchM
	for _, tc := range []struct{ x, want float64 }{
		{els[2].X, prof[2]},
		{els[2].X + pitch/4, 0.75*prof[2] + 0.25*prof[3]},
		{els[0].X - 1e-3, prof[0]},
		{els[7].X + 1e-3, prof[7]},
	} {
		if got := c.At(tc.x); math.Abs(got-tc.want) > 1e-20 {
			t.Errorf("At(%g mm) = %g, want %g", tc.x*1e3, got, tc.want)
		}
	}
	// Transmit: a plane wave takes the correction at its stationary point,
	// a single-element event that element's.
	ev := acq.PlaneWaveSequence(&p, []float64{5}, c1540)[0]
	w := recon.NewWave(c, &ev, p.CenterFrequencyHz)
	tb, xs := base.Transmit(w, 0.0005, 0.002)
	tc, xc := c.Transmit(w, 0.0005, 0.002)
	if xc != xs || math.Abs(tc-(tb+c.At(xs))) > tol {
		t.Errorf("plane wave: (%g, %g), want (%g, %g)", tc, xc, tb+c.At(xs), xs)
	}
	se := acq.SyntheticApertureSequence(&p)[3]
	w = recon.NewWave(c, &se, p.CenterFrequencyHz)
	tb, _ = base.Transmit(w, 0.0005, 0.01)
	tc, _ = c.Transmit(w, 0.0005, 0.01)
	if math.Abs(tc-(tb+prof[3])) > tol {
		t.Errorf("single element: %g, want %g", tc, tb+prof[3])
	}
	if c.FaceSpeed() != c1540 || len(c.Elements()) != len(els) {
		t.Error("corrected model: face speed or elements differ from the base")
	}
	if s := c.String(); !strings.Contains(s, "1540.00") || !strings.Contains(s, "ns rms") {
		t.Errorf("String() = %q", s)
	}

	for _, bad := range [][]float64{
		prof[:7],                                // too few
		{0, 0, 0, math.NaN(), 0, 0, 0, 0},       // not finite
		{0, 0, 0, 0, 0, 0, 0, 2e-4},             // over 100 us
		{0, 0, math.Inf(1), 0, 0, 0, 0, 0},      // not finite
		{0, 0, 0, 0, 0, 0, 0, -1.5e-4},          // over 100 us
		append(append([]float64{}, prof...), 0), // too many
	} {
		if _, err := recon.NewCorrected(base, bad); err == nil {
			t.Errorf("NewCorrected(%v): no error", bad)
		}
	}
}

func TestHomogeneousString(t *testing.T) {
	t.Parallel()
	h := recon.NewHomogeneous(1483.2, nil)
	if s := h.String(); !strings.Contains(s, "1483.20") {
		t.Errorf("String() = %q", s)
	}
}
