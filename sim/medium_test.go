package sim

import (
	"math"
	"math/rand/v2"
	"testing"

	"celerity/acq"
)

// travelTimeTol: the simulator's ray solve must agree with the reference
// Snell and Fermat solves to 1 ns, a fiftieth of a sample at 20 MHz and far
// below any arrival-time error an estimator resolves.
const travelTimeTol = 1e-9

// fermatSlack allows the reference Fermat minimum, found numerically, to sit
// a rounding error above the true minimum.
const fermatSlack = 1e-13

var (
	fatOverLiver = []acq.Layer{{ThicknessM: 0.010, SpeedMPS: 1450}, {SpeedMPS: 1570}}
	fastOverSlow = []acq.Layer{{ThicknessM: 0.006, SpeedMPS: 1600}, {SpeedMPS: 1440}}
	threeLayers  = []acq.Layer{{ThicknessM: 0.005, SpeedMPS: 1450}, {ThicknessM: 0.008, SpeedMPS: 1600}, {SpeedMPS: 1540}}
)

// TestTravelTimeSnellFermat compares Medium.TravelTime through flat layers
// with the reference Snell solve (bisection on the angle; derived, geometric
// acoustics) and with Fermat's principle (brute-force minimum over the
// crossing points): the simulated time must equal both within 1 ns and never
// undercut the Fermat minimum.
func TestTravelTimeSnellFermat(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name           string
		layers         []acq.Layer
		ex, ez, px, pz float64
	}{
		{"two layers vertical", fatOverLiver, 0, 0, 0, 0.030},
		{"two layers 5 mm offset", fatOverLiver, -0.002, 0, 0.003, 0.025},
		{"two layers 20 mm offset", fatOverLiver, 0.010, 0, -0.010, 0.020},
		{"two layers 40 mm offset, steep in the fast layer", fatOverLiver, -0.020, 0, 0.020, 0.012},
		{"two layers target in first layer", fatOverLiver, 0.001, 0, 0.006, 0.008},
		{"two layers target on the interface", fatOverLiver, 0.001, 0, 0.006, 0.010},
		{"fast over slow", fastOverSlow, 0.0, 0, 0.015, 0.030},
		{"fast over slow, large offset", fastOverSlow, 0.019, 0, -0.019, 0.020},
		{"three layers", threeLayers, 0.002, 0, -0.004, 0.035},
		{"three layers, target in middle layer", threeLayers, -0.005, 0, 0.004, 0.009},
		{"three layers, large offset", threeLayers, -0.018, 0, 0.018, 0.016},
		{"three layers, element above the face (convex)", threeLayers, 0.012, -0.0012, 0.001, 0.030},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			m := Layered(tc.layers...)
			checkNoErr(t, m.Validate())
			got := m.TravelTime(tc.ex, tc.ez, tc.px, tc.pz)
			st := stackOf(tc.layers)
			snell, _ := snellTime(st, tc.ex, tc.ez, tc.px, tc.pz)
			v, _, zs := st.segments(tc.ez, tc.pz)
			fermat := fermatTime(v, zs, tc.ex, tc.px)
			if d := math.Abs(got - snell); d > travelTimeTol {
				t.Errorf("TravelTime %.9g us, Snell reference %.9g us: differ by %.3g ns", got*1e6, snell*1e6, d*1e9)
			}
			if d := math.Abs(got - fermat); d > travelTimeTol {
				t.Errorf("TravelTime %.9g us, Fermat minimum %.9g us: differ by %.3g ns", got*1e6, fermat*1e6, d*1e9)
			}
			// no path is faster than the Fermat minimum
			if got < fermat-fermatSlack {
				t.Errorf("TravelTime %.15g s undercuts the Fermat minimum %.15g s", got, fermat)
			}
			t.Logf("t = %.6f us; Snell - sim %.2e ns, Fermat - sim %.2e ns", got*1e6, (snell-got)*1e9, (fermat-got)*1e9)
		})
	}
}

// TestTravelTimeHomogeneous: a homogeneous medium gives r / c (derived:
// straight rays).
func TestTravelTimeHomogeneous(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	for _, c := range []float64{1480, 1540, 1600} {
		m := Homogeneous(c)
		for range 200 {
			ex, ez := (rng.Float64()-0.5)*0.04, -rng.Float64()*0.002
			px, pz := (rng.Float64()-0.5)*0.06, 0.001+rng.Float64()*0.06
			want := math.Hypot(px-ex, pz-ez) / c
			if got := m.TravelTime(ex, ez, px, pz); math.Abs(got-want) > 1e-15 {
				t.Fatalf("c=%g: TravelTime(%g,%g -> %g,%g) = %.15g, want r/c = %.15g", c, ex, ez, px, pz, got, want)
			}
		}
	}
}

// TestTracerWarmStart: the tracer keeps the last ray parameter as a starting
// guess; random geometries traced in sequence by one tracer must match the
// reference Snell solve as if each were traced alone, in time, path length
// and the direction in which the ray leaves the element.
func TestTracerWarmStart(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	for _, layers := range [][]acq.Layer{fatOverLiver, fastOverSlow, threeLayers} {
		m := Layered(layers...)
		tr := newTracer(&m)
		st := stackOf(layers)
		for k := range 2000 {
			ex, ez := (rng.Float64()-0.5)*0.04, 0.0
			px, pz := (rng.Float64()-0.5)*0.06, 0.0005+rng.Float64()*0.05
			r := tr.trace(ex, ez, px, pz)
			wantT, wantL := snellTime(st, ex, ez, px, pz)
			if math.Abs(r.T-wantT) > travelTimeTol {
				t.Fatalf("ray %d (%g,%g -> %g,%g): T = %.9g s, Snell %.9g s", k, ex, ez, px, pz, r.T, wantT)
			}
			// path length: 1 ns of travel is about 1.5 um of path
			if math.Abs(r.L-wantL) > 1.5e-6 {
				t.Fatalf("ray %d: L = %.9g m, Snell %.9g m", k, r.L, wantL)
			}
			// leaving direction: sin of the angle in the first layer crossed
			// is v_first * p, and the offset is covered in the right direction
			v, h, _ := st.segments(ez, pz)
			wantSin := 0.0
			if px != ex {
				sinF := bisectSin(v, h, math.Abs(px-ex))
				wantSin = math.Copysign(sinF, px-ex)
			}
			if math.Abs(r.DX-wantSin) > 1e-6 || math.Abs(r.DX*r.DX+r.DZ*r.DZ-1) > 1e-12 || r.DZ < 0 {
				t.Fatalf("ray %d: direction (%g, %g), want sin %g", k, r.DX, r.DZ, wantSin)
			}
		}
	}
}

// bisectSin returns the sin of the ray's angle in the first of the layers
// (speeds v, thicknesses h) for a lateral offset D, by bisection on the ray
// parameter p = sin(a_k) / v_k.
func bisectSin(v, h []float64, D float64) float64 {
	vmax := 0.0
	for _, vk := range v {
		vmax = math.Max(vmax, vk)
	}
	lo, hi := 0.0, 1/vmax
	for range 200 {
		p := (lo + hi) / 2
		x := 0.0
		for k := range v {
			s := p * v[k]
			x += h[k] * s / math.Sqrt(1-s*s)
		}
		if x < D {
			lo = p
		} else {
			hi = p
		}
	}
	return (lo + hi) / 2 * v[0]
}

// TestMediumMeanSpeed: the vertical time-average speed (derived: z over the
// vertical travel time sum h_k / v_k).
func TestMediumMeanSpeed(t *testing.T) {
	t.Parallel()
	m := Layered(threeLayers...)
	cases := []struct{ z, want float64 }{
		{0.004, 1450},
		{0.005, 1450},
		{0.010, 0.010 / (0.005/1450 + 0.005/1600)},
		{0.030, 0.030 / (0.005/1450 + 0.008/1600 + 0.017/1540)},
	}
	for _, c := range cases {
		if got := m.MeanSpeed(c.z); math.Abs(got-c.want) > 1e-9 {
			t.Errorf("MeanSpeed(%g) = %.12g, want %.12g", c.z, got, c.want)
		}
		// and it is the vertical two-way time's speed
		if got := m.TravelTime(0, 0, 0, c.z); math.Abs(got-c.z/c.want) > 1e-15 {
			t.Errorf("vertical TravelTime(%g) = %.15g, want z / mean speed %.15g", c.z, got, c.z/c.want)
		}
	}
	if got := m.MinSpeed(); got != 1450 {
		t.Errorf("MinSpeed = %g, want 1450", got)
	}
}

// TestMediumValidate: speeds, thicknesses and attenuation out of range are
// errors naming the layer.
func TestMediumValidate(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		m    Medium
		ok   bool
	}{
		{"homogeneous", Homogeneous(1540), true},
		{"layered", Layered(threeLayers...), true},
		{"no layers", Medium{}, false},
		{"slow", Homogeneous(100), false},
		{"NaN speed", Homogeneous(math.NaN()), false},
		{"zero thickness", Layered(acq.Layer{SpeedMPS: 1450}, acq.Layer{SpeedMPS: 1540}), false},
		{"negative attenuation", Medium{Layers: []acq.Layer{{SpeedMPS: 1540}}, AttenuationDBPerCmMHz: -1}, false},
		{"attenuation too high", Medium{Layers: []acq.Layer{{SpeedMPS: 1540}}, AttenuationDBPerCmMHz: 21}, false},
	}
	for _, c := range cases {
		err := c.m.Validate()
		if (err == nil) != c.ok {
			t.Errorf("%s: Validate() = %v, want ok=%v", c.name, err, c.ok)
		}
	}
}
