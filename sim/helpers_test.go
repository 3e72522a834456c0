package sim

import (
	"math"
	"testing"

	"celerity/acq"
	"celerity/internal/dsp"
)

// Shared fixtures of the physics tests. The travel-time helpers here are
// written out independently of medium.go, so that an error in either shows.

// testProbe returns a small linear array: n elements at 0.3 mm pitch, 5 MHz,
// 70 % bandwidth, 0.27 mm wide elements (directivity on).
func testProbe(n int) acq.Probe {
	return acq.Probe{Geometry: acq.Linear, Count: n, PitchM: 0.3e-3, CenterFrequencyHz: 5e6,
		FractionalBandwidth: 0.7, ElementWidthM: 0.27e-3}
}

// singleElement returns the event in which element i of n fires alone at t = 0.
func singleElement(n, i int) acq.Event {
	w := make([]float64, n)
	w[i] = 1
	return acq.Event{Delays: make([]float64, n), Weights: w}
}

// route is one of the simulator's two ways of computing channel data.
type route struct {
	name string
	run  func(cfg *Config) ([]float32, error)
}

// routes: direct deposit, and synthesis from the single-element records
// (which Simulate uses for sequences of several full-aperture events).
var routes = []route{
	{"direct", func(cfg *Config) ([]float32, error) { return simulateDirect(cfg, 2) }},
	{"synthesis", func(cfg *Config) ([]float32, error) { return synthesize(cfg, 2) }},
}

// envelopePeak returns the time (s) of the envelope maximum of one RF channel
// within [lo, hi] (s), refined by a parabola through the logarithm of the
// envelope at the maximum sample and its two neighbours (exact for a Gaussian
// envelope, whose logarithm is a parabola), and the envelope there. ok is
// false when the maximum lies on the window's edge (no peak inside).
func envelopePeak(h *dsp.Hilbert, rf []float32, fs, t0, lo, hi float64) (t, amp float64, ok bool) {
	z := h.Analytic(nil, rf)
	env := dsp.Envelope(nil, z)
	i0 := max(1, int(math.Ceil((lo-t0)*fs)))
	i1 := min(len(env)-2, int(math.Floor((hi-t0)*fs)))
	best := -1
	for i := i0; i <= i1; i++ {
		if best < 0 || env[i] > env[best] {
			best = i
		}
	}
	if best <= i0 || best >= i1 || env[best] <= 0 {
		return 0, 0, false
	}
	y0 := math.Log(float64(env[best-1]))
	y1 := math.Log(float64(env[best]))
	y2 := math.Log(float64(env[best+1]))
	d, v := dsp.ParabolicPeak(y0, y1, y2)
	return t0 + (float64(best)+d)/fs, math.Exp(v), true
}

// layerStack describes flat layers for the independent travel-time helpers:
// speeds v[k] and the depths of the interfaces between them (len(v)-1 values,
// increasing). The first layer extends upwards without end, the last one
// downwards.
type layerStack struct {
	v     []float64
	zints []float64
}

func stackOf(layers []acq.Layer) layerStack {
	var s layerStack
	z := 0.0
	for i, l := range layers {
		s.v = append(s.v, l.SpeedMPS)
		if i < len(layers)-1 {
			z += l.ThicknessM
			s.zints = append(s.zints, z)
		}
	}
	return s
}

// segments returns the speeds and vertical extents of the layers that the
// path from depth ez down to depth pz (pz >= ez) crosses, in order, and the
// depths of the path's break points (ez, the interfaces crossed, pz).
func (s layerStack) segments(ez, pz float64) (v, h, zs []float64) {
	zs = []float64{ez}
	top := math.Inf(-1)
	for k, vk := range s.v {
		bot := math.Inf(1)
		if k < len(s.zints) {
			bot = s.zints[k]
		}
		lo, hi := math.Max(top, ez), math.Min(bot, pz)
		if hi > lo {
			v = append(v, vk)
			h = append(h, hi-lo)
			zs = append(zs, hi)
		}
		top = bot
	}
	if len(v) == 0 { // ez == pz: a horizontal path in the element's layer
		k := 0
		for k < len(s.zints) && ez >= s.zints[k] {
			k++
		}
		v, h, zs = []float64{s.v[k]}, []float64{0}, []float64{ez, pz}
	}
	return v, h, zs
}

// snellTime is the reference Snell solve: the one-way travel time and path
// length from (ex, ez) to (px, pz) through flat layers. In every layer k the
// ray's angle a_k from the vertical obeys sin(a_k) / v_k = sin(a_f) / v_f
// (Snell's law, with f the fastest layer crossed, so that every sin(a_k) <= 1);
// a_f is bisected on [0, pi/2) until the lateral offsets h_k tan(a_k) add up
// to |px - ex|. Then t = sum h_k / (v_k cos(a_k)) and l = sum h_k / cos(a_k).
// Derived: geometric acoustics, Snell's law at flat interfaces.
func snellTime(s layerStack, ex, ez, px, pz float64) (t, l float64) {
	v, h, _ := s.segments(ez, pz)
	D := math.Abs(px - ex)
	if len(v) == 1 {
		r := math.Hypot(D, pz-ez)
		return r / v[0], r
	}
	vf := 0.0
	for _, vk := range v {
		vf = math.Max(vf, vk)
	}
	offset := func(af float64) float64 {
		x := 0.0
		for k := range v {
			sk := math.Sin(af) * v[k] / vf
			x += h[k] * sk / math.Sqrt(1-sk*sk)
		}
		return x
	}
	lo, hi := 0.0, math.Pi/2
	for range 200 {
		mid := (lo + hi) / 2
		if offset(mid) < D {
			lo = mid
		} else {
			hi = mid
		}
	}
	af := (lo + hi) / 2
	for k := range v {
		sk := math.Sin(af) * v[k] / vf
		ck := math.Sqrt(1 - sk*sk)
		t += h[k] / (v[k] * ck)
		l += h[k] / ck
	}
	return t, l
}

// fermatTime is the reference Fermat solve: the least travel time over all
// paths made of straight segments between the break points zs (one crossing
// per interface), found by a brute-force scan of each crossing point followed
// by a golden-section refinement, nested over the interfaces. The time is a
// sum of Euclidean norms of the crossing coordinates, hence convex, so the
// scan's best bracket holds the global minimum.
func fermatTime(v, zs []float64, x0, xEnd float64) float64 {
	if len(v) == 1 {
		return math.Hypot(xEnd-x0, zs[1]-zs[0]) / v[0]
	}
	f := func(x float64) float64 {
		return math.Hypot(x-x0, zs[1]-zs[0])/v[0] + fermatTime(v[1:], zs[1:], x, xEnd)
	}
	a, b := math.Min(x0, xEnd), math.Max(x0, xEnd)
	if b-a < 1e-12 {
		return f(a)
	}
	const n = 400
	step := (b - a) / n
	best, bv := a, f(a)
	for k := 1; k <= n; k++ {
		x := a + float64(k)*step
		if y := f(x); y < bv {
			best, bv = x, y
		}
	}
	lo, hi := math.Max(a, best-step), math.Min(b, best+step)
	const g = 0.6180339887498949
	c, d := hi-g*(hi-lo), lo+g*(hi-lo)
	fc, fd := f(c), f(d)
	for hi-lo > 1e-11 {
		if fc < fd {
			hi, d, fd = d, c, fc
			c = hi - g*(hi-lo)
			fc = f(c)
		} else {
			lo, c, fc = c, d, fd
			d = lo + g*(hi-lo)
			fd = f(d)
		}
	}
	return math.Min(bv, math.Min(fc, fd))
}

// refTime is the reference one-way travel time in a layered medium: the Snell
// solve (the Fermat solve is compared with it in medium_test.go).
func refTime(layers []acq.Layer, ex, ez, px, pz float64) float64 {
	t, _ := snellTime(stackOf(layers), ex, ez, px, pz)
	return t
}

// minOver returns the minimum of f on [a, b] by a dense scan and a
// golden-section refinement of the best bracket (f unimodal near its minimum).
func minOver(f func(float64) float64, a, b float64) (x, fx float64) {
	const n = 2000
	step := (b - a) / n
	best, bv := a, f(a)
	for k := 1; k <= n; k++ {
		xk := a + float64(k)*step
		if y := f(xk); y < bv {
			best, bv = xk, y
		}
	}
	lo, hi := math.Max(a, best-step), math.Min(b, best+step)
	const g = 0.6180339887498949
	for hi-lo > 1e-12 {
		c, d := hi-g*(hi-lo), lo+g*(hi-lo)
		if f(c) < f(d) {
			hi = d
		} else {
			lo = c
		}
	}
	x = (lo + hi) / 2
	if fx = f(x); fx > bv {
		return best, bv
	}
	return x, fx
}

// checkNoErr fails the test on err.
func checkNoErr(t testing.TB, err error) {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
}
