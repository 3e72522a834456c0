package acq

import (
	"fmt"
	"math"
	"sort"

	"celerity/internal/dsp"
)

// Firing-delay builders. Each returns delays relative to the event's t = 0,
// shifted so that the first element fires at t = 0, computed for the speed c
// that the scanner assumes.

// PlaneWaveDelays returns the firing delays that launch a plane wave at angle
// theta (radians from +z towards +x) in a medium of speed c:
//
//	d_i = (x_i sin(theta) + z_i cos(theta)) / c - min_k(...)
func PlaneWaveDelays(els []Element, theta, c float64) []float64 {
	s, co := math.Sincos(theta)
	d := make([]float64, len(els))
	for i, e := range els {
		d[i] = (e.X*s + e.Z*co) / c
	}
	return shiftToZero(d)
}

// DivergingDelays returns the firing delays of a diverging wave from a virtual
// source at (vx, vz) behind the array (vz < 0):
//
//	d_i = (|e_i - v| - min_k |e_k - v|) / c
func DivergingDelays(els []Element, vx, vz, c float64) []float64 {
	d := make([]float64, len(els))
	for i, e := range els {
		d[i] = math.Hypot(e.X-vx, e.Z-vz) / c
	}
	return shiftToZero(d)
}

// FocusedDelays returns the firing delays that focus at (fx, fz), fz > 0:
//
//	d_i = (max_k |e_k - f| - |e_i - f|) / c
func FocusedDelays(els []Element, fx, fz, c float64) []float64 {
	d := make([]float64, len(els))
	for i, e := range els {
		d[i] = -math.Hypot(e.X-fx, e.Z-fz) / c
	}
	return shiftToZero(d)
}

func shiftToZero(d []float64) []float64 {
	lo := math.Inf(1)
	for _, v := range d {
		lo = math.Min(lo, v)
	}
	for i := range d {
		d[i] -= lo
		if d[i] == 0 {
			d[i] = 0 // no negative zero
		}
	}
	return d
}

// PlaneWaveSequence returns one plane-wave event per angle (degrees), all
// elements firing with unit weight.
func PlaneWaveSequence(p *Probe, anglesDeg []float64, c float64) []Event {
	els := p.Elements()
	out := make([]Event, len(anglesDeg))
	for i, a := range anglesDeg {
		out[i] = Event{Delays: PlaneWaveDelays(els, a*math.Pi/180, c), Weights: ones(len(els)), Label: PlaneWaveLabel(a)}
	}
	return out
}

// SpreadAngles returns n angles evenly spread over [-maxDeg, maxDeg]
// (a single 0 when n is 1).
func SpreadAngles(n int, maxDeg float64) []float64 {
	if n <= 1 {
		return []float64{0}
	}
	out := make([]float64, n)
	for i := range out {
		out[i] = -maxDeg + 2*maxDeg*float64(i)/float64(n-1)
	}
	return out
}

// DivergingSequence returns one diverging-wave event per virtual source
// (x, z) with z < 0.
func DivergingSequence(p *Probe, sources [][2]float64, c float64) []Event {
	els := p.Elements()
	out := make([]Event, len(sources))
	for i, v := range sources {
		out[i] = Event{Delays: DivergingDelays(els, v[0], v[1], c), Weights: ones(len(els)), Label: VirtualSourceLabel(v[0], v[1])}
	}
	return out
}

// FocusedSequence returns one focused beam per lateral position xs, focused at
// depth fz, each using the elements within a sub-aperture of width fz/fnumber
// centred on its line (all elements when fnumber <= 0).
func FocusedSequence(p *Probe, xs []float64, fz, fnumber, c float64) []Event {
	els := p.Elements()
	out := make([]Event, len(xs))
	for i, x := range xs {
		w := ones(len(els))
		if fnumber > 0 {
			half := fz / fnumber / 2
			for k, e := range els {
				if math.Abs(e.X-x) > half {
					w[k] = 0
				}
			}
			if len(firingOf(w)) == 0 {
				w[nearest(els, x)] = 1
			}
		}
		out[i] = Event{Delays: FocusedDelays(els, x, fz, c), Weights: w, Label: VirtualSourceLabel(x, fz)}
	}
	return out
}

// SyntheticApertureSequence returns one event per element, each firing that
// element alone: the full synthetic-aperture (transmit-receive pair) sequence.
func SyntheticApertureSequence(p *Probe) []Event {
	n := p.NumElements()
	out := make([]Event, n)
	for i := range out {
		w := make([]float64, n)
		w[i] = 1
		out[i] = Event{Delays: make([]float64, n), Weights: w, Label: SingleElementLabel(i)}
	}
	return out
}

func firingOf(w []float64) []int {
	var out []int
	for i, v := range w {
		if v != 0 {
			out = append(out, i)
		}
	}
	return out
}

func nearest(els []Element, x float64) int {
	best, bd := 0, math.Inf(1)
	for i, e := range els {
		if d := math.Abs(e.X - x); d < bd {
			best, bd = i, d
		}
	}
	return best
}

// TransmitKind is the kind of wave a set of firing delays launches.
type TransmitKind int

// Transmit kinds inferred from firing delays.
const (
	KindUnknown TransmitKind = iota
	KindPlaneWave
	KindDiverging
	KindFocused
	KindSingleElement
)

func (k TransmitKind) String() string {
	switch k {
	case KindPlaneWave:
		return "plane wave"
	case KindDiverging:
		return "diverging wave"
	case KindFocused:
		return "focused beam"
	case KindSingleElement:
		return "single element"
	}
	return "unknown"
}

// Wavefront is the wave a transmit event launches, as seen by a beamformer
// that assumes speed C. It is derived from the firing delays, never from the
// label.
type Wavefront struct {
	Kind TransmitKind
	C    float64 // the speed the wavefront was derived for, m/s

	// Plane wave: d(x) = T0 + Slope x; sin(theta) = C * Slope.
	Slope float64 // s/m
	Theta float64 // rad

	// Virtual source (diverging: behind the array; focused: in front):
	// d_i = T0 + Sign |e_i - V| / C with Sign +1 diverging, -1 focused.
	VX, VZ float64
	Sign   float64

	T0 float64 // s

	// Element is the firing element of a single-element event.
	Element int

	// RMSResidual is the rms misfit of the model to the firing delays, s.
	RMSResidual float64
}

// String describes the wavefront.
func (w Wavefront) String() string {
	switch w.Kind {
	case KindPlaneWave:
		return fmt.Sprintf("plane wave %.2f deg", w.Theta*180/math.Pi)
	case KindDiverging:
		return fmt.Sprintf("diverging wave from (%.2f, %.2f) mm", w.VX*1e3, w.VZ*1e3)
	case KindFocused:
		return fmt.Sprintf("focused beam at (%.2f, %.2f) mm", w.VX*1e3, w.VZ*1e3)
	case KindSingleElement:
		return fmt.Sprintf("single element %d", w.Element)
	}
	return "unknown wavefront"
}

// FitTolerance returns the rms residual (s) below which a wave model is
// accepted for firing delays of a probe with centre frequency f0: a hundredth
// of a period, or 1 ns, whichever is larger.
func FitTolerance(f0 float64) float64 { return math.Max(1e-9, 0.01/f0) }

// DeriveWavefront infers the wave launched by ev for a beamformer that
// assumes speed c: a single firing element; else a plane wave whose delays are
// linear in x (sin(theta) = c * slope); else a virtual source fitted by least
// squares at speed c, diverging or focused. tol is the accepted rms residual
// (FitTolerance when 0). Kind is KindUnknown when no model fits within tol;
// the best fit is returned all the same.
func DeriveWavefront(els []Element, ev *Event, c, tol float64, f0 float64) Wavefront {
	if tol <= 0 {
		tol = FitTolerance(f0)
	}
	fire := ev.Firing()
	if len(fire) == 1 {
		k := fire[0]
		return Wavefront{Kind: KindSingleElement, C: c, Element: k, T0: ev.Delays[k], VX: els[k].X, VZ: els[k].Z}
	}
	pw := FitPlane(els, ev, c)
	if pw.RMSResidual <= tol {
		return pw
	}
	vs := FitVirtualSource(els, ev, c)
	if vs.RMSResidual <= tol {
		return vs
	}
	best := pw
	if vs.RMSResidual < pw.RMSResidual {
		best = vs
	}
	best.Kind = KindUnknown
	return best
}

// FitPlane fits d_i = T0 + Slope x_i over the firing elements by least
// squares and returns the plane wave with sin(theta) = c * Slope. Elements off
// the z = 0 line add to the residual, so curved arrays rarely classify as
// plane waves.
func FitPlane(els []Element, ev *Event, c float64) Wavefront {
	var sw, sx, sy, sxx, sxy float64
	for i, e := range els {
		w := ev.Weights[i]
		if w == 0 {
			continue
		}
		sw++
		sx += e.X
		sy += ev.Delays[i]
		sxx += e.X * e.X
		sxy += e.X * ev.Delays[i]
	}
	den := sw*sxx - sx*sx
	var slope, t0 float64
	if den > 0 {
		slope = (sw*sxy - sx*sy) / den
		t0 = (sy - slope*sx) / sw
	} else if sw > 0 {
		t0 = sy / sw
	}
	var ss float64
	for i, e := range els {
		if ev.Weights[i] == 0 {
			continue
		}
		r := ev.Delays[i] - t0 - slope*e.X
		if e.Z != 0 {
			// a plane wave from a curved face: the z offset is a misfit here
			r = math.Hypot(r, e.Z/c)
		}
		ss += r * r
	}
	sin := math.Max(-1, math.Min(1, c*slope))
	w := Wavefront{Kind: KindPlaneWave, C: c, Slope: slope, Theta: math.Asin(sin), T0: t0}
	if sw > 0 {
		w.RMSResidual = math.Sqrt(ss / sw)
	}
	if math.Abs(c*slope) >= 1 {
		w.RMSResidual = math.Inf(1) // evanescent at this speed: not a plane wave
	}
	return w
}

// FitVirtualSource fits d_i = T0 + Sign |e_i - V| / c over the firing elements
// by Levenberg-Marquardt least squares in (VX, VZ, T0), for both signs, and
// returns the better fit: Sign +1 is a diverging wave (V behind the array),
// Sign -1 a focused beam.
func FitVirtualSource(els []Element, ev *Event, c float64) Wavefront {
	var xs, zs, ds []float64
	for i, e := range els {
		if ev.Weights[i] != 0 {
			xs = append(xs, e.X)
			zs = append(zs, e.Z)
			ds = append(ds, ev.Delays[i])
		}
	}
	best := Wavefront{Kind: KindUnknown, C: c, RMSResidual: math.Inf(1)}
	if len(xs) < 3 {
		return best
	}
	// Initial guess from a parabola d = a + b x + q x^2: vertex and radius.
	a, b, q := fitParabola(xs, ds)
	_ = a
	span := xs[len(xs)-1] - xs[0]
	for _, sign := range []float64{1, -1} {
		var vx, r float64
		if q != 0 && sign*q > 0 {
			vx = -b / (2 * q)
			r = 1 / (2 * c * math.Abs(q))
		} else {
			vx = 0
			r = 10 * math.Abs(span)
		}
		if math.Abs(vx) > 10*math.Abs(span) || math.IsNaN(vx) {
			vx = 0
		}
		r = math.Min(math.Max(r, 1e-4), 10)
		vz := -sign * r // diverging: behind; focused: in front
		w := lmVirtualSource(xs, zs, ds, c, sign, vx, vz)
		if w.RMSResidual < best.RMSResidual {
			best = w
		}
	}
	return best
}

func fitParabola(xs, ys []float64) (a, b, q float64) {
	a, b, q, _ = dsp.FitQuadratic(xs, ys)
	return a, b, q
}

// lmVirtualSource refines (vx, vz) by Levenberg-Marquardt; T0 is solved in
// closed form at each step (it enters linearly).
func lmVirtualSource(xs, zs, ds []float64, c, sign, vx, vz float64) Wavefront {
	n := len(xs)
	res := func(vx, vz float64) (t0, ss float64) {
		for i := range n {
			t0 += ds[i] - sign*math.Hypot(xs[i]-vx, zs[i]-vz)/c
		}
		t0 /= float64(n)
		for i := range n {
			r := ds[i] - t0 - sign*math.Hypot(xs[i]-vx, zs[i]-vz)/c
			ss += r * r
		}
		return t0, ss
	}
	_, ss := res(vx, vz)
	lambda := 1e-3
	for iter := 0; iter < 200; iter++ {
		// Jacobian of r_i = d_i - t0 - sign*|e-v|/c w.r.t. (vx, vz, t0).
		var jtj [3][3]float64
		var jtr [3]float64
		t0, _ := res(vx, vz)
		for i := range n {
			dx, dz := xs[i]-vx, zs[i]-vz
			r := math.Hypot(dx, dz)
			if r == 0 {
				r = 1e-12
			}
			ri := ds[i] - t0 - sign*r/c
			j := [3]float64{sign * dx / (r * c), sign * dz / (r * c), -1}
			for a := range 3 {
				jtr[a] += j[a] * ri
				for b := range 3 {
					jtj[a][b] += j[a] * j[b]
				}
			}
		}
		improved := false
		for try := 0; try < 20; try++ {
			m := jtj
			for a := range 3 {
				m[a][a] *= 1 + lambda
			}
			step, ok := solve3(m, [3]float64{-jtr[0], -jtr[1], -jtr[2]})
			if !ok {
				lambda *= 10
				continue
			}
			nvx, nvz := vx+step[0], vz+step[1]
			// keep the source on its side of the array
			if sign*nvz > 0 {
				nvz = vz / 2
			}
			_, nss := res(nvx, nvz)
			if nss < ss {
				conv := math.Abs(ss-nss) <= 1e-14*ss || math.Hypot(step[0], step[1]) < 1e-10
				vx, vz, ss = nvx, nvz, nss
				lambda = math.Max(lambda/10, 1e-12)
				improved = true
				if conv {
					iter = 1 << 30
				}
				break
			}
			lambda *= 10
		}
		if !improved {
			break
		}
	}
	t0, ss := res(vx, vz)
	kind := KindDiverging
	if sign < 0 {
		kind = KindFocused
	}
	return Wavefront{Kind: kind, C: c, VX: vx, VZ: vz, Sign: sign, T0: t0, RMSResidual: math.Sqrt(ss / float64(n))}
}

func solve3(m [3][3]float64, b [3]float64) ([3]float64, bool) { return dsp.Solve3(m, b) }

// SequenceSummary describes the events of an acquisition, grouped by kind.
type SequenceSummary struct {
	Counts map[TransmitKind]int
	// AnglesDeg are the plane-wave angles at the scanner's assumed speed, sorted.
	AnglesDeg []float64
	// Sources are the fitted virtual sources (diverging and focused), m.
	Sources [][2]float64
}

// Summarize infers the kind of every event at the scanner's assumed speed.
func Summarize(a *Acquisition) SequenceSummary {
	els := a.Probe.Elements()
	s := SequenceSummary{Counts: map[TransmitKind]int{}}
	for i := range a.Events {
		w := DeriveWavefront(els, &a.Events[i], a.AssumedSpeedMPS, 0, a.Probe.CenterFrequencyHz)
		s.Counts[w.Kind]++
		switch w.Kind {
		case KindPlaneWave:
			s.AnglesDeg = append(s.AnglesDeg, w.Theta*180/math.Pi)
		case KindDiverging, KindFocused:
			s.Sources = append(s.Sources, [2]float64{w.VX, w.VZ})
		}
	}
	sort.Float64s(s.AnglesDeg)
	return s
}

// CompoundedWaves reports whether events (indices into a.Events; nil means
// all) are three or more plane or diverging waves, their wavefronts derived
// from the firing delays at the scanner's assumed speed: a sequence whose
// events' images can be compounded coherently, each insonifying the whole
// field. Indices out of range give false.
func CompoundedWaves(a *Acquisition, events []int) bool {
	if events == nil {
		events = make([]int, a.NumEvents())
		for i := range events {
			events[i] = i
		}
	}
	if len(events) < 3 {
		return false
	}
	els := a.Probe.Elements()
	for _, e := range events {
		if e < 0 || e >= a.NumEvents() {
			return false
		}
		w := DeriveWavefront(els, &a.Events[e], a.AssumedSpeedMPS, 0, a.Probe.CenterFrequencyHz)
		if w.Kind != KindPlaneWave && w.Kind != KindDiverging {
			return false
		}
	}
	return true
}
