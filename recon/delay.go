package recon

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"celerity/acq"
)

// DelayModel gives the travel times a beamformer uses. Implementations here:
// Homogeneous, Layered and Corrected (any model plus per-element
// arrival-time corrections).
type DelayModel interface {
	// Elements returns the array the model was made for.
	Elements() []acq.Element
	// FaceSpeed returns the speed (m/s) at the array face, at which the
	// wave launched by a set of firing delays is derived.
	FaceSpeed() float64
	// Receive returns the one-way travel time (s) from (x, z) to element j.
	Receive(j int, x, z float64) float64
	// Transmit returns the arrival time (s) at (x, z) of the transmitted
	// wave w, and the position along the array (x, m) of the firing element
	// whose wavelet defines the wavefront there (the stationary point).
	Transmit(w *Wave, x, z float64) (t, xs float64)
	// String describes the model.
	String() string
}

// Wave is one transmit event as the beamformer sees it: the firing delays
// and weights the scanner used, and the wavefront derived from them at the
// model's face speed.
type Wave struct {
	Front   acq.Wavefront
	Delays  []float64
	Weights []float64
	Firing  []int
	// order lists the firing elements sorted by x.
	order []int
}

// NewWave derives the wave launched by ev for model m.
func NewWave(m DelayModel, ev *acq.Event, f0 float64) *Wave {
	els := m.Elements()
	w := &Wave{Delays: ev.Delays, Weights: ev.Weights, Firing: ev.Firing()}
	w.Front = acq.DeriveWavefront(els, ev, m.FaceSpeed(), 0, f0)
	w.order = append([]int(nil), w.Firing...)
	sort.SliceStable(w.order, func(a, b int) bool { return els[w.order[a]].X < els[w.order[b]].X })
	return w
}

// Homogeneous is a medium of one speed: straight rays.
type Homogeneous struct {
	C   float64
	els []acq.Element
}

// NewHomogeneous returns the homogeneous model of speed c for the elements.
func NewHomogeneous(c float64, els []acq.Element) *Homogeneous {
	return &Homogeneous{C: c, els: els}
}

// Elements implements DelayModel.
func (h *Homogeneous) Elements() []acq.Element { return h.els }

// FaceSpeed implements DelayModel.
func (h *Homogeneous) FaceSpeed() float64 { return h.C }

func (h *Homogeneous) String() string { return fmt.Sprintf("homogeneous %.2f m/s", h.C) }

// Receive is t = |p - e_j| / c.
func (h *Homogeneous) Receive(j int, x, z float64) float64 {
	e := h.els[j]
	dx, dz := x-e.X, z-e.Z
	return math.Sqrt(dx*dx+dz*dz) / h.C
}

// Transmit implements DelayModel with the closed forms of each wave kind:
//
//	plane wave:     t = T0 + (x sin(theta) + z cos(theta)) / c, sin(theta) = c * slope
//	diverging wave: t = T0 + |p - v| / c
//	focused beam:   t = T0 -/+ |p - f| / c before/beyond the focal depth
//	single element: t = d_k + |p - e_k| / c
//
// and a stationary-phase search over the firing elements when the delays fit
// no model.
func (h *Homogeneous) Transmit(w *Wave, x, z float64) (float64, float64) {
	f := &w.Front
	c := h.C
	switch f.Kind {
	case acq.KindPlaneWave:
		s, co := math.Sincos(f.Theta)
		return f.T0 + (x*s+z*co)/c, x - z*s/co
	case acq.KindDiverging:
		return f.T0 + math.Hypot(x-f.VX, z-f.VZ)/c, rayFoot(f.VX, f.VZ, x, z)
	case acq.KindFocused:
		r := math.Hypot(x-f.VX, z-f.VZ) / c
		xs := rayFoot(f.VX, f.VZ, x, z)
		if z < f.VZ {
			return f.T0 - r, xs
		}
		return f.T0 + r, xs
	case acq.KindSingleElement:
		return w.Delays[f.Element] + h.Receive(f.Element, x, z), h.els[f.Element].X
	}
	return stationary(h, w, x, z, false)
}

// rayFoot returns where the line through (vx, vz) and (x, z) crosses z = 0.
func rayFoot(vx, vz, x, z float64) float64 {
	if z == vz {
		return vx
	}
	return vx + (x-vx)*(0-vz)/(z-vz)
}

// stationary finds the stationary value over the firing elements of
// d(xe) + Receive(xe -> p), with the firing delays interpolated linearly
// between elements: the minimum (first arrival) or, with wantMax, the
// maximum. It scans every element, then refines with a parabola through the
// best element and its neighbours.
func stationary(m DelayModel, w *Wave, x, z float64, wantMax bool) (float64, float64) {
	els := m.Elements()
	order := w.order
	n := len(order)
	val := func(k int) float64 { return w.Delays[order[k]] + m.Receive(order[k], x, z) }
	best, bi := math.Inf(1), -1
	if wantMax {
		best = math.Inf(-1)
	}
	for k := range order {
		v := val(k)
		if (!wantMax && v < best) || (wantMax && v > best) {
			best, bi = v, k
		}
	}
	if bi < 0 {
		return math.Inf(1), x
	}
	xs := els[order[bi]].X
	if bi > 0 && bi < n-1 {
		y0, y1, y2 := val(bi-1), best, val(bi+1)
		den := y0 - 2*y1 + y2
		if den != 0 {
			off := 0.5 * (y0 - y2) / den
			if math.Abs(off) < 1 {
				best = y1 - 0.25*(y0-y2)*off
				x0, x1, x2 := els[order[bi-1]].X, els[order[bi]].X, els[order[bi+1]].X
				if off < 0 {
					xs = x1 + off*(x1-x0)
				} else {
					xs = x1 + off*(x2-x1)
				}
			}
		}
	}
	return best, xs
}

// Layered is a medium of horizontal layers from the array face down, each
// with its own speed; rays refract at the flat interfaces (Snell's law). The
// first layer also fills the space above z = 0 where curved arrays sit.
type Layered struct {
	speeds []float64
	bots   []float64 // interface depths, len(speeds)-1
	els    []acq.Element
}

// NewLayered returns the layered model. The last layer has no thickness.
func NewLayered(layers []acq.Layer, els []acq.Element) (*Layered, error) {
	if len(layers) == 0 {
		return nil, fmt.Errorf("layered model: no layers")
	}
	l := &Layered{els: els}
	z := 0.0
	for i, ly := range layers {
		if !(ly.SpeedMPS >= 100 && ly.SpeedMPS <= 10000) {
			return nil, fmt.Errorf("layered model: layer %d: speed %g m/s out of range", i, ly.SpeedMPS)
		}
		l.speeds = append(l.speeds, ly.SpeedMPS)
		if i < len(layers)-1 {
			if !(ly.ThicknessM > 0) {
				return nil, fmt.Errorf("layered model: layer %d: thickness must be positive", i)
			}
			z += ly.ThicknessM
			l.bots = append(l.bots, z)
		}
	}
	return l, nil
}

// Elements implements DelayModel.
func (l *Layered) Elements() []acq.Element { return l.els }

// FaceSpeed implements DelayModel: the first layer's speed.
func (l *Layered) FaceSpeed() float64 { return l.speeds[0] }

func (l *Layered) String() string {
	var parts []string
	top := 0.0
	for i, v := range l.speeds {
		if i < len(l.bots) {
			parts = append(parts, fmt.Sprintf("%.4g mm at %.2f m/s", (l.bots[i]-top)*1e3, v))
			top = l.bots[i]
		} else {
			parts = append(parts, fmt.Sprintf("%.2f m/s below", v))
		}
	}
	return "layered: " + strings.Join(parts, ", ")
}

// Receive implements DelayModel by Fermat's principle: the travel time is
// the minimum over the points where the path crosses each interface of
//
//	T(c_1..c_m) = sum_k |q_k - q_(k-1)| / v_k,
//
// a convex function of the crossing abscissae, minimised by Newton's method
// with its tridiagonal Hessian, starting from the straight line.
func (l *Layered) Receive(j int, x, z float64) float64 {
	e := l.els[j]
	return l.time(e.X, e.Z, x, z)
}

// time returns the first-arrival time between (ax, az) and (bx, bz).
func (l *Layered) time(ax, az, bx, bz float64) float64 {
	if bz < az {
		ax, az, bx, bz = bx, bz, ax, az
	}
	// interfaces strictly between the two depths
	var zs []float64
	var vs []float64
	k0 := l.layerOf(az)
	// The lower end belongs to the layer the ray arrives from, so that an end
	// exactly on an interface adds no zero-length segment (whose gradient
	// would be 0/0, making the time NaN).
	k1 := l.layerAbove(bz)
	if k1 <= k0 {
		return math.Hypot(bx-ax, bz-az) / l.speeds[k0]
	}
	var buf [8]float64
	zs = buf[:0]
	for k := k0; k < k1; k++ {
		zs = append(zs, l.bots[k])
	}
	var vbuf [9]float64
	vs = vbuf[:0]
	for k := k0; k <= k1; k++ {
		vs = append(vs, l.speeds[k])
	}
	m := len(zs)
	// crossing abscissae, straight-line start
	var cbuf [8]float64
	cx := cbuf[:0]
	for _, zi := range zs {
		cx = append(cx, ax+(bx-ax)*(zi-az)/(bz-az))
	}
	px := func(i int) (float64, float64) {
		switch {
		case i < 0:
			return ax, az
		case i >= m:
			return bx, bz
		}
		return cx[i], zs[i]
	}
	// work arrays on the stack for up to 8 crossed interfaces
	var gb, db, ob, cpb, dpb [8]float64
	g, d, o, cp, dp := gb[:], db[:], ob[:], cpb[:], dpb[:]
	if m > len(gb) {
		g, d, o, cp, dp = make([]float64, m), make([]float64, m), make([]float64, m), make([]float64, m), make([]float64, m)
	}
	for it := 0; it < 50; it++ {
		// gradient and tridiagonal Hessian of T in the crossing abscissae
		maxStep := 0.0
		for i := 0; i < m; i++ {
			x0, z0 := px(i - 1)
			x1, z1 := px(i)
			x2, z2 := px(i + 1)
			r1 := math.Hypot(x1-x0, z1-z0)
			r2 := math.Hypot(x2-x1, z2-z1)
			g[i] = (x1-x0)/(r1*vs[i]) - (x2-x1)/(r2*vs[i+1])
			d[i] = (z1-z0)*(z1-z0)/(r1*r1*r1*vs[i]) + (z2-z1)*(z2-z1)/(r2*r2*r2*vs[i+1])
			if i < m-1 {
				o[i] = -(z2 - z1) * (z2 - z1) / (r2 * r2 * r2 * vs[i+1])
			}
		}
		// solve the tridiagonal system H s = g (Thomas algorithm)
		for i := 0; i < m; i++ {
			den := d[i]
			if i > 0 {
				den -= o[i-1] * cp[i-1]
			}
			if i < m-1 {
				cp[i] = o[i] / den
			}
			num := g[i]
			if i > 0 {
				num -= o[i-1] * dp[i-1]
			}
			dp[i] = num / den
		}
		for i := m - 1; i >= 0; i-- {
			s := dp[i]
			if i < m-1 {
				s -= cp[i] * dp[i+1]
				dp[i] = s
			}
		}
		for i := 0; i < m; i++ {
			cx[i] -= dp[i]
			maxStep = math.Max(maxStep, math.Abs(dp[i]))
		}
		if maxStep < 1e-13 {
			break
		}
	}
	t := 0.0
	for i := 0; i <= m; i++ {
		x0, z0 := px(i - 1)
		x1, z1 := px(i)
		t += math.Hypot(x1-x0, z1-z0) / vs[i]
	}
	return t
}

func (l *Layered) layerOf(z float64) int {
	for k, b := range l.bots {
		if z < b {
			return k
		}
	}
	return len(l.bots)
}

// layerAbove is layerOf with a depth on an interface counted in the layer
// above it.
func (l *Layered) layerAbove(z float64) int {
	for k, b := range l.bots {
		if z <= b {
			return k
		}
	}
	return len(l.bots)
}

// Transmit implements DelayModel. A plane wave keeps its horizontal slowness
// s (the slope of the firing delays) through flat interfaces, so
//
//	t = T0 + s x + sum_k h_k sqrt(1/v_k^2 - s^2)
//
// with h_k the thickness of layer k above depth z. Single-element events use
// the ray from the element; other waves the stationary point over the
// firing elements (the minimum of d + T, or beyond the focal depth of a
// focused beam the maximum).
func (l *Layered) Transmit(w *Wave, x, z float64) (float64, float64) {
	f := &w.Front
	switch f.Kind {
	case acq.KindPlaneWave:
		s := f.Slope
		t := f.T0 + s*x
		top := 0.0
		xs := x
		for k, v := range l.speeds {
			bot := z
			if k < len(l.bots) {
				bot = math.Min(z, l.bots[k])
			}
			h := bot - top
			if h > 0 {
				q2 := 1/(v*v) - s*s
				if q2 <= 0 {
					return math.Inf(1), x // totally reflected before reaching z
				}
				q := math.Sqrt(q2)
				t += h * q
				xs -= h * s / q // tan(theta_k) = s / q
			}
			top = bot
			if top >= z {
				break
			}
		}
		return t, xs
	case acq.KindSingleElement:
		return w.Delays[f.Element] + l.Receive(f.Element, x, z), l.els[f.Element].X
	case acq.KindFocused:
		return stationary(l, w, x, z, z >= f.VZ)
	}
	return stationary(l, w, x, z, false)
}

// Corrected adds per-element arrival-time corrections to a base model: the
// correction of element j is added to every receive path into j, and to the
// transmit path of the firing element whose wavelet defines the wavefront
// (the stationary element; for a single-element event, that element). For
// plane and diverging waves this is the geometric-acoustics view of a thin
// screen at the array: it recovers the screen's delay of the wavefront along
// each ray, not the reshaping of the transmitted beam by a screen that varies
// within one Fresnel zone.
type Corrected struct {
	Base DelayModel
	// Profile holds one correction per element, s (positive = later).
	Profile []float64
	xs      []float64
	px      []float64 // profile sorted by x
}

// NewCorrected returns base plus the per-element profile (s).
func NewCorrected(base DelayModel, profile []float64) (*Corrected, error) {
	els := base.Elements()
	if len(profile) != len(els) {
		return nil, fmt.Errorf("corrected model: %d corrections for %d elements", len(profile), len(els))
	}
	for i, v := range profile {
		if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1e-4 {
			return nil, fmt.Errorf("corrected model: correction %d (%g s) must be finite and within 100 us", i, v)
		}
	}
	c := &Corrected{Base: base, Profile: append([]float64(nil), profile...)}
	idx := make([]int, len(els))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return els[idx[a]].X < els[idx[b]].X })
	for _, i := range idx {
		c.xs = append(c.xs, els[i].X)
		c.px = append(c.px, profile[i])
	}
	return c, nil
}

// Elements implements DelayModel.
func (c *Corrected) Elements() []acq.Element { return c.Base.Elements() }

// FaceSpeed implements DelayModel.
func (c *Corrected) FaceSpeed() float64 { return c.Base.FaceSpeed() }

func (c *Corrected) String() string {
	rms := 0.0
	for _, v := range c.Profile {
		rms += v * v
	}
	rms = math.Sqrt(rms / float64(len(c.Profile)))
	return fmt.Sprintf("%s with per-element corrections (%.1f ns rms)", c.Base, rms*1e9)
}

// Receive implements DelayModel.
func (c *Corrected) Receive(j int, x, z float64) float64 {
	return c.Base.Receive(j, x, z) + c.Profile[j]
}

// Transmit implements DelayModel.
func (c *Corrected) Transmit(w *Wave, x, z float64) (float64, float64) {
	t, xs := c.Base.Transmit(w, x, z)
	if w.Front.Kind == acq.KindSingleElement {
		return t + c.Profile[w.Front.Element], xs
	}
	return t + c.At(xs), xs
}

// At returns the correction at position x along the array, interpolated
// linearly between elements and held constant beyond the ends.
func (c *Corrected) At(x float64) float64 {
	n := len(c.xs)
	if x <= c.xs[0] {
		return c.px[0]
	}
	if x >= c.xs[n-1] {
		return c.px[n-1]
	}
	k := sort.SearchFloat64s(c.xs, x)
	x0, x1 := c.xs[k-1], c.xs[k]
	a := (x - x0) / (x1 - x0)
	return (1-a)*c.px[k-1] + a*c.px[k]
}
