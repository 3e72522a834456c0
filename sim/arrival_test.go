package sim

import (
	"math"
	"math/rand/v2"
	"testing"

	"celerity/acq"
	"celerity/internal/dsp"
)

// arrivalTolSamples: a point target's echo peak must arrive at its geometric
// travel time within a tenth of a sample (5 ns at 20 MHz), the accuracy the
// speed and aberration estimators are judged at (a 0.1 % speed error at 20 mm
// depth moves a two-way arrival by 26 ns).
const arrivalTolSamples = 0.1

// closedFormTol: the closed-form wave arrival must equal the brute-force
// minimum over the aperture of firing delay plus travel time (the stationary
// element) to 0.1 ns; both are exact, this only absorbs the scan's rounding.
const closedFormTol = 1e-10

const (
	arrivalFs = 20e6 // Hz, four samples per period at 5 MHz
	arrivalC  = 1540.0
)

// continuousDelay extends an event's firing delays to any x along a flat
// array (the scanner's formula for its kind), checked against the delays it
// actually holds.
type continuousDelay func(x float64) float64

// planeDelay: d(x) = T0 + x sin(theta) / c_assumed, T0 taken from element 0.
func planeDelay(els []acq.Element, ev acq.Event, thetaDeg, ca float64) continuousDelay {
	slope := math.Sin(thetaDeg*math.Pi/180) / ca
	t0 := ev.Delays[0] - slope*els[0].X
	return func(x float64) float64 { return t0 + slope*x }
}

// divergingDelay: d(x) = (|x - v| - min_k |e_k - v|) / c_assumed.
func divergingDelay(els []acq.Element, vx, vz, ca float64) continuousDelay {
	m := math.Inf(1)
	for _, e := range els {
		m = math.Min(m, math.Hypot(e.X-vx, e.Z-vz))
	}
	return func(x float64) float64 { return (math.Hypot(x-vx, vz) - m) / ca }
}

// waveArrival is the time at which the wave an event launches reaches the
// point p: the minimum over the (continuous) aperture of the firing delay
// plus the travel time from there to p, attained at the stationary element
// (derived: Fermat / stationary phase; the sum over elements of delayed pulses
// peaks where the arrival time is stationary).
func waveArrival(els []acq.Element, d continuousDelay, layers []acq.Layer, px, pz float64) float64 {
	_, t := minOver(func(x float64) float64 { return d(x) + refTime(layers, x, 0, px, pz) },
		els[0].X, els[len(els)-1].X)
	return t
}

// TestPointTargetArrival simulates a single point scatterer and checks that
// the envelope peak of its echo on every element arrives at the geometric
// travel time: the arrival of the transmitted wave at the scatterer (firing
// delay of the stationary element plus the path out, plus the screen of the
// firing element) plus the path back to the element and its screen value.
// Every case runs on both routes (direct deposit and synthesis).
func TestPointTargetArrival(t *testing.T) {
	t.Parallel()
	const n = 48
	probe := testProbe(n)
	els := probe.Elements()
	twoLayers := []acq.Layer{{ThicknessM: 0.006, SpeedMPS: 1450}, {SpeedMPS: 1570}}
	homog := func(c float64) []acq.Layer { return []acq.Layer{{SpeedMPS: c}} }
	// a chest-wall-like screen, 30 ns rms, 3 mm correlation length
	xs := make([]float64, n)
	for i, e := range els {
		xs[i] = e.X
	}
	screen, err := DrawScreen(rand.New(rand.NewPCG(1, 2)), xs, 30e-9, 3e-3)
	checkNoErr(t, err)

	type arrivalCase struct {
		name   string
		layers []acq.Layer
		event  acq.Event
		screen []float64
		px, pz float64
		// tx is the arrival of the transmitted wave at the target, s
		tx func() float64
		// probe, if set, replaces the 48-element linear array
		probe *acq.Probe
		// start is the time of the first recorded sample, s
		start float64
	}
	se := func(i int, layers []acq.Layer, scr []float64, px, pz float64) func() float64 {
		return func() float64 {
			phi := 0.0
			if scr != nil {
				phi = scr[i]
			}
			return phi + refTime(layers, els[i].X, els[i].Z, px, pz)
		}
	}
	pw := func(deg, ca float64) acq.Event { return acq.PlaneWaveSequence(&probe, []float64{deg}, ca)[0] }
	div := func(vx, vz, ca float64) acq.Event {
		return acq.DivergingSequence(&probe, [][2]float64{{vx, vz}}, ca)[0]
	}
	// planeClosed is the plane wave's arrival through flat layers, derived
	// from the conserved horizontal slowness s = sin(theta_k) / v_k (the
	// slope of the firing delays): T0 + s x + sum_k h_k sqrt(1/v_k^2 - s^2);
	// homogeneous, T0 + (x sin(theta) + z cos(theta)) / c with sin(theta) = c s.
	planeClosed := func(ev acq.Event, deg, ca float64, layers []acq.Layer, px, pz float64) func() float64 {
		return func() float64 {
			s := math.Sin(deg*math.Pi/180) / ca
			t := ev.Delays[0] - s*els[0].X + s*px
			st := stackOf(layers)
			v, h, _ := st.segments(0, pz)
			for k := range v {
				t += h[k] * math.Sqrt(1/(v[k]*v[k])-s*s)
			}
			return t
		}
	}
	ev10, ev0, evm12 := pw(10, 1540), pw(0, 1540), pw(-12, 1540)
	evLayer := pw(8, 1540)
	evDiv, evDiv2, evDivL := div(0.002, -0.010, 1540), div(-0.003, -0.008, 1540), div(0, -0.012, 1540)
	focus := acq.FocusedSequence(&probe, []float64{0.001}, 0.015, 2, 1540)[0]
	// a convex array: elements up to 1.2 mm above z = 0 (in the first
	// layer, which fills the space above the face), normals tilted by up to
	// 11 degrees
	convex := acq.NewConvex(n, 0.5e-3, 0.06, 3.5e6)
	convex.FractionalBandwidth, convex.ElementWidthM = 0.6, 0.45e-3
	cvx := convex.Elements()
	seConvex := func(i int, layers []acq.Layer, px, pz float64) func() float64 {
		return func() float64 { return refTime(layers, cvx[i].X, cvx[i].Z, px, pz) }
	}
	// derived: when the medium is at the assumed speed c, a diverging wave
	// from v reaches p at (|p - v| - min_k |e_k - v|) / c
	divClosed := func() float64 {
		m := math.Inf(1)
		for _, e := range els {
			m = math.Min(m, math.Hypot(e.X-0.002, e.Z+0.010))
		}
		return (math.Hypot(0.001-0.002, 0.018+0.010) - m) / arrivalC
	}
	cases := []arrivalCase{
		{name: "single element", layers: homog(arrivalC), event: singleElement(n, 12), px: 0.0015, pz: 0.014,
			tx: se(12, homog(arrivalC), nil, 0.0015, 0.014)},
		{name: "single edge element, 1480 m/s", layers: homog(1480), event: singleElement(n, 0), px: -0.002, pz: 0.018,
			tx: se(0, homog(1480), nil, -0.002, 0.018)},
		{name: "plane wave 0 deg", layers: homog(arrivalC), event: ev0, px: 0.0006, pz: 0.020,
			tx: planeClosed(ev0, 0, 1540, homog(arrivalC), 0.0006, 0.020)},
		{name: "plane wave 10 deg", layers: homog(arrivalC), event: ev10, px: 0.0025, pz: 0.015,
			tx: planeClosed(ev10, 10, 1540, homog(arrivalC), 0.0025, 0.015)},
		// the scanner assumed 1540 m/s; in 1480 m/s the wave travels at
		// sin(theta) = 1480 sin(-12 deg) / 1540
		{name: "plane wave -12 deg, medium 1480 m/s", layers: homog(1480), event: evm12, px: -0.0025, pz: 0.016,
			tx: planeClosed(evm12, -12, 1540, homog(1480), -0.0025, 0.016)},
		{name: "diverging wave", layers: homog(arrivalC), event: evDiv, px: 0.001, pz: 0.018, tx: divClosed},
		{name: "diverging wave, medium 1570 m/s", layers: homog(1570), event: evDiv2, px: 0.002, pz: 0.016,
			tx: func() float64 {
				return waveArrival(els, divergingDelay(els, -0.003, -0.008, 1540), homog(1570), 0.002, 0.016)
			}},
		// derived: at its focus every element's pulse arrives at once, at
		// max_k |e_k - f| / c (the delays are relative to the farthest
		// element of the whole array)
		{name: "focused beam at its focus", layers: homog(arrivalC), event: focus, px: 0.001, pz: 0.015,
			tx: func() float64 {
				m := 0.0
				for _, e := range els {
					m = math.Max(m, math.Hypot(e.X-0.001, e.Z-0.015))
				}
				return m / arrivalC
			}},
		{name: "two layers, single element", layers: twoLayers, event: singleElement(n, 30), px: -0.002, pz: 0.016,
			tx: se(30, twoLayers, nil, -0.002, 0.016)},
		{name: "two layers, plane wave 8 deg", layers: twoLayers, event: evLayer, px: 0.002, pz: 0.016,
			tx: planeClosed(evLayer, 8, 1540, twoLayers, 0.002, 0.016)},
		{name: "two layers, diverging wave", layers: twoLayers, event: evDivL, px: 0.001, pz: 0.020,
			tx: func() float64 {
				return waveArrival(els, divergingDelay(els, 0, -0.012, 1540), twoLayers, 0.001, 0.020)
			}},
		{name: "phase screen, single element", layers: homog(arrivalC), event: singleElement(n, 20), screen: screen,
			px: 0, pz: 0.015, tx: se(20, homog(arrivalC), screen, 0, 0.015)},
		{name: "convex array, single edge element", layers: homog(arrivalC), event: singleElement(n, 2), probe: &convex,
			px: -0.004, pz: 0.025, tx: seConvex(2, homog(arrivalC), -0.004, 0.025)},
		{name: "convex array, two layers, single element", layers: twoLayers, event: singleElement(n, 40), probe: &convex,
			px: 0.003, pz: 0.022, tx: seConvex(40, twoLayers, 0.003, 0.022)},
		{name: "plane wave 10 deg, record from 12 us", layers: homog(arrivalC), event: ev10, px: 0.0025, pz: 0.015, start: 12e-6,
			tx: planeClosed(ev10, 10, 1540, homog(arrivalC), 0.0025, 0.015)},
		{name: "phase screen and two layers, single element", layers: twoLayers, event: singleElement(n, 5), screen: screen,
			px: 0.003, pz: 0.017, tx: se(5, twoLayers, screen, 0.003, 0.017)},
	}
	// The closed forms must be the minimum over the aperture (the
	// stationary element) that defines the wave's arrival.
	closed := []struct {
		name   string
		ev     acq.Event
		deg    float64
		layers []acq.Layer
		px, pz float64
	}{
		{"0 deg", ev0, 0, homog(arrivalC), 0.0006, 0.020},
		{"10 deg", ev10, 10, homog(arrivalC), 0.0025, 0.015},
		{"-12 deg in 1480 m/s", evm12, -12, homog(1480), -0.0025, 0.016},
		{"8 deg, two layers", evLayer, 8, twoLayers, 0.002, 0.016},
	}
	for _, c := range closed {
		d := planeDelay(els, c.ev, c.deg, 1540)
		for k, e := range els {
			if math.Abs(d(e.X)-c.ev.Delays[k]) > 1e-15 {
				t.Fatalf("%s: continuous delay at element %d is %g, event holds %g", c.name, k, d(e.X), c.ev.Delays[k])
			}
		}
		want := planeClosed(c.ev, c.deg, 1540, c.layers, c.px, c.pz)()
		if got := waveArrival(els, d, c.layers, c.px, c.pz); math.Abs(got-want) > closedFormTol {
			t.Errorf("plane wave %s: closed form %.12g s, minimum over the aperture %.12g s", c.name, want, got)
		}
	}
	dd := divergingDelay(els, 0.002, -0.010, 1540)
	for k, e := range els {
		if math.Abs(dd(e.X)-evDiv.Delays[k]) > 1e-15 {
			t.Fatalf("diverging: continuous delay at element %d is %g, event holds %g", k, dd(e.X), evDiv.Delays[k])
		}
	}
	if got, want := waveArrival(els, dd, homog(arrivalC), 0.001, 0.018), divClosed(); math.Abs(got-want) > closedFormTol {
		t.Errorf("diverging: closed form %.12g s, minimum over the aperture %.12g s", want, got)
	}

	for _, tc := range cases {
		for _, rt := range routes {
			t.Run(tc.name+"/"+rt.name, func(t *testing.T) {
				t.Parallel()
				tx := tc.tx()
				pr := probe
				if tc.probe != nil {
					pr = *tc.probe
				}
				rx := make([]float64, n)
				tmax := 0.0
				for j, e := range pr.Elements() {
					rx[j] = refTime(tc.layers, e.X, e.Z, tc.px, tc.pz)
					if tc.screen != nil {
						rx[j] += tc.screen[j]
					}
					tmax = math.Max(tmax, tx+rx[j])
				}
				cfg := &Config{Probe: pr, Events: []acq.Event{tc.event}, AssumedSpeedMPS: 1540,
					SamplingRateHz: arrivalFs, StartTimeS: tc.start, NumSamples: int((tmax + 2e-6 - tc.start) * arrivalFs),
					Medium: Medium{Layers: tc.layers}, Screen: tc.screen,
					Scatterers: []Scatterer{{X: tc.px, Z: tc.pz, Amp: 1}}}
				checkNoErr(t, cfg.Validate())
				rf, err := rt.run(cfg)
				checkNoErr(t, err)
				h := dsp.NewHilbert(cfg.NumSamples)
				worst, worstJ := 0.0, -1
				for j := range n {
					want := tx + rx[j]
					got, _, ok := envelopePeak(h, rf[j*cfg.NumSamples:(j+1)*cfg.NumSamples], arrivalFs, tc.start, want-0.5e-6, want+0.5e-6)
					if !ok {
						t.Errorf("element %d: no echo peak within 0.5 us of %.4f us", j, want*1e6)
						continue
					}
					errS := (got - want) * arrivalFs
					if math.Abs(errS) > math.Abs(worst) {
						worst, worstJ = errS, j
					}
					if math.Abs(errS) > arrivalTolSamples {
						t.Errorf("element %d: echo peak at %.5f us, geometric arrival %.5f us: off by %.3f samples",
							j, got*1e6, want*1e6, errS)
					}
				}
				t.Logf("%s, %s route: largest arrival error %+.4f samples (%+.2f ns) on element %d",
					tc.name, rt.name, worst, worst/arrivalFs*1e9, worstJ)
			})
		}
	}
}

// TestRouteChoice: Simulate takes the synthesis route for sequences of
// several full-aperture events and the direct route otherwise, and its
// result is that route's, bit for bit.
func TestRouteChoice(t *testing.T) {
	t.Parallel()
	p := testProbe(32)
	sc := []Scatterer{{X: 0.001, Z: 0.012, Amp: 1}}
	cases := []struct {
		name   string
		events []acq.Event
		synth  bool
	}{
		{"one plane wave", acq.PlaneWaveSequence(&p, []float64{0}, 1540), false},
		{"three plane waves", acq.PlaneWaveSequence(&p, []float64{-5, 0, 5}, 1540), true},
		{"two diverging waves", acq.DivergingSequence(&p, [][2]float64{{0, -0.01}, {0.002, -0.01}}, 1540), true},
		{"synthetic aperture", acq.SyntheticApertureSequence(&p), false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			cfg := &Config{Probe: p, Events: tc.events, AssumedSpeedMPS: 1540, SamplingRateHz: arrivalFs,
				NumSamples: 400, Medium: Homogeneous(1540), Scatterers: sc, Workers: 2}
			if got := useSynthesis(cfg); got != tc.synth {
				t.Fatalf("useSynthesis = %v, want %v", got, tc.synth)
			}
			a, err := Simulate(cfg)
			checkNoErr(t, err)
			want, err := routes[0].run(cfg)
			if tc.synth {
				want, err = routes[1].run(cfg)
			}
			checkNoErr(t, err)
			for k := range want {
				if math.Float32bits(want[k]) != math.Float32bits(a.RF[k]) {
					t.Fatalf("Simulate differs from the %s route at sample %d", map[bool]string{false: "direct", true: "synthesis"}[tc.synth], k)
				}
			}
		})
	}
}

// echoAmpTol: the single-element echo's envelope peak must match the model's
// amplitude within 1 % (the linear split of each impulse over two bins of the
// deposit grid, at least 8 bins per envelope sigma, lowers the peak by under
// 0.2 %; float32 rounding and the analytic signal's band edges cost less).
const echoAmpTol = 0.01

// TestSingleElementAmplitude checks the echo amplitude of a point scatterer
// for single-element events against the model of doc.go written out here:
// A g_i g_j with g = D(theta) r_ref / r, r_ref = 1 cm, and the element
// directivity D(theta) = cos(theta) sin(u) / u, u = pi w sin(theta) / lambda,
// theta measured from the element's normal (the narrow-strip element in a soft
// baffle; form from memory: Selfridge, Kino & Khuri-Yakub, Appl. Phys. Lett.
// 1980). The Gaussian pulse has unit envelope peak.
func TestSingleElementAmplitude(t *testing.T) {
	t.Parallel()
	const n = 48
	lin := testProbe(n)
	cvx := acq.NewConvex(n, 0.5e-3, 0.06, 3.5e6)
	cvx.FractionalBandwidth, cvx.ElementWidthM = 0.6, 0.45e-3
	cases := []struct {
		name   string
		probe  acq.Probe
		i      int
		px, pz float64
		amp    float64
	}{
		{"linear, centre", lin, 24, 0.0003, 0.012, 1},
		{"linear, edge element, oblique", lin, 0, 0.006, 0.010, -2.5},
		{"convex", cvx, 5, 0.002, 0.020, 0.7},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			c := arrivalC
			els := tc.probe.Elements()
			g := func(e acq.Element) (float64, float64) {
				dx, dz := tc.px-e.X, tc.pz-e.Z
				r := math.Hypot(dx, dz)
				cos := (dx*e.NX + dz*e.NZ) / r
				sin := math.Sqrt(1 - cos*cos)
				u := math.Pi * tc.probe.ElementWidthM * sin / (c / tc.probe.CenterFrequencyHz)
				d := cos
				if u > 0 {
					d *= math.Sin(u) / u
				}
				return d * 0.01 / r, r / c
			}
			gi, ti := g(els[tc.i])
			cfg := &Config{Probe: tc.probe, Events: []acq.Event{singleElement(n, tc.i)}, AssumedSpeedMPS: 1540,
				SamplingRateHz: 40e6, NumSamples: 1400, Medium: Homogeneous(c),
				Scatterers: []Scatterer{{X: tc.px, Z: tc.pz, Amp: tc.amp}}}
			a, err := Simulate(cfg)
			checkNoErr(t, err)
			h := dsp.NewHilbert(cfg.NumSamples)
			worst := 0.0
			for j, e := range els {
				gj, tj := g(e)
				want := math.Abs(tc.amp * gi * gj)
				_, got, ok := envelopePeak(h, a.RFChannel(0, j), cfg.SamplingRateHz, 0, ti+tj-0.5e-6, ti+tj+0.5e-6)
				if !ok {
					t.Fatalf("element %d: no echo", j)
				}
				rel := got/want - 1
				if math.Abs(rel) > math.Abs(worst) {
					worst = rel
				}
				if math.Abs(rel) > echoAmpTol {
					t.Errorf("element %d: echo amplitude %.5g, model %.5g (%+.2f %%)", j, got, want, 100*rel)
				}
			}
			t.Logf("%s: largest amplitude error %+.3f %%", tc.name, 100*worst)
		})
	}
}
