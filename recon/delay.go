package recon

import (
	"fmt"
	"math"
	"math/cmplx"
	"sort"
	"strings"
	"sync"

	"celerity/acq"
	"celerity/internal/dsp"
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
// within one Fresnel zone. NewCorrectedField sums the wavelets of the
// elements within that zone instead (fieldDelay); against the simulator's
// element-by-element emission through a 40 ns, 2.5 mm screen it is within
// 3 ns rms where the geometric view is 17 ns off (TestFieldTransmitDelay).
type Corrected struct {
	Base DelayModel
	// Profile holds one correction per element, s (positive = later).
	Profile []float64
	// Field, set by NewCorrectedField, finds the transmit delay of plane and
	// diverging waves from the wavelets of the firing elements near the
	// stationary one instead of at the stationary element alone.
	Field TransmitField
	rot   []complex128 // exp(-j 2 pi f0 profile)
	xs    []float64
	px    []float64 // profile sorted by x
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
	g := c.At(xs)
	if c.fieldApplies(w) {
		return t + c.fieldDelay(w, x, z, t, xs, g), xs
	}
	return t + g, xs
}

// fieldApplies says whether the transmit field sum gives w's delays: a
// model with a field, and a plane or diverging wave.
func (c *Corrected) fieldApplies(w *Wave) bool {
	return c.rot != nil && (w.Front.Kind == acq.KindPlaneWave || w.Front.Kind == acq.KindDiverging)
}

// TransmitField sets how Corrected finds the delay that the corrections
// put on a transmitted plane or diverging wave.
type TransmitField struct {
	// CentreHz is the pulse's centre frequency; 0 keeps the geometric
	// view (the correction at the stationary element).
	CentreHz float64
	// SigmaS is the std of the pulse's Gaussian envelope, s (> 0).
	SigmaS float64
	// Cache, if not nil, keeps what does not depend on the corrections
	// between models that share it (FieldCache).
	Cache *FieldCache
}

// FieldOf returns the transmit field of probe p's pulse: its centre
// frequency and the envelope of a Gaussian pulse of its fractional
// bandwidth (-6 dB; 0.6 when the probe does not give one).
func FieldOf(p *acq.Probe) TransmitField {
	bw := p.FractionalBandwidth
	if !(bw > 0) {
		bw = 0.6
	}
	sigmaF := p.CenterFrequencyHz * bw / (2 * math.Sqrt(2*math.Ln2))
	return TransmitField{CentreHz: p.CenterFrequencyHz, SigmaS: 1 / (2 * math.Pi * sigmaF)}
}

// NewCorrectedField is NewCorrected with the transmit field f.
func NewCorrectedField(base DelayModel, profile []float64, f TransmitField) (*Corrected, error) {
	c, err := NewCorrected(base, profile)
	if err != nil {
		return nil, err
	}
	if f.CentreHz > 0 && f.SigmaS > 0 {
		c.Field = f
		c.rot = make([]complex128, len(profile))
		for i, v := range profile {
			s, co := math.Sincos(-2 * math.Pi * f.CentreHz * v)
			c.rot[i] = complex(co, s)
		}
	}
	return c, nil
}

// fieldDelay returns the delay that the corrections put on the plane or
// diverging wave w at (x, z): the phase, at the centre frequency, of the
// sum of the firing elements' wavelets with their corrections against the
// sum without them, each wavelet weighted by its weight, its obliquity over
// the square root of its path (a line source in the image plane) and the
// pulse envelope at its arrival time relative to the wavefront's t. Only
// the elements whose wavelets arrive within the envelope shape the
// wavefront there (the first Fresnel zone), so a correction that varies
// within that zone reshapes the wavefront rather than shifting it by the
// value g at the stationary element xs. The result is unwrapped towards g,
// and g is returned where the wavelets cancel.
//
// The arrival times grow away from the stationary element (Fermat), so the
// sum walks outwards from it on either side until they leave the envelope.
func (c *Corrected) fieldDelay(w *Wave, x, z, t, xs, g float64) float64 {
	return c.fieldFrom(c.fieldTerms(w, x, z, t, xs), g)
}

// fieldFrom is fieldDelay from the terms ft.
func (c *Corrected) fieldFrom(ft *fieldTerms, g float64) float64 {
	var f1s complex128
	for k, i := range ft.idx {
		f1s += complex128(ft.v[k]) * c.rot[i]
	}
	if ft.mag == 0 || cmplx.Abs(ft.f0) < 0.1*ft.mag || cmplx.Abs(f1s) < 0.1*ft.mag {
		return g
	}
	// f1 = f0 exp(-j omega delay)
	omega := 2 * math.Pi * c.Field.CentreHz
	ph := cmplx.Phase(ft.f0 * cmplx.Conj(f1s))
	return g + math.Remainder(ph/omega-g, 2*math.Pi/omega)
}

// fieldTerms are the part of fieldDelay that does not depend on the
// corrections: the firing elements whose wavelets arrive within the
// envelope at a point, each wavelet's weighted phasor, their sum and the
// sum of the weights.
type fieldTerms struct {
	idx []int32
	v   []complex64
	f0  complex128
	mag float64
}

func (c *Corrected) fieldTerms(w *Wave, x, z, t, xs float64) *fieldTerms {
	els := c.Base.Elements()
	f0 := c.Field.CentreHz
	invS := 1 / c.Field.SigmaS
	reach := gaussReach * c.Field.SigmaS
	order := w.order
	k0 := sort.Search(len(order), func(k int) bool { return els[order[k]].X >= xs })
	ft := &fieldTerms{}
	var idxBuf [64]int32
	var vBuf [64]complex64
	ft.idx, ft.v = idxBuf[:0], vBuf[:0]
	hom, _ := c.Base.(*Homogeneous)
	invC := 0.0
	if hom != nil {
		invC = 1 / hom.C
	}
	// the elements from the stationary one outwards, right then left
	for pass := range 2 {
		k, step := k0, 1
		if pass == 1 {
			k, step = k0-1, -1
		}
		for ; k >= 0 && k < len(order); k += step {
			i := order[k]
			e := &els[i]
			dx, dz := x-e.X, z-e.Z
			r := math.Sqrt(dx*dx + dz*dz)
			var tau float64
			if hom != nil {
				tau = w.Delays[i] + r*invC
			} else {
				tau = w.Delays[i] + c.Base.Receive(i, x, z)
			}
			d := tau - t
			if math.Abs(d) > reach {
				break
			}
			if r == 0 {
				continue
			}
			inv := 1 / r
			cos := (dx*e.NX + dz*e.NZ) * inv
			if cos <= 0 {
				continue
			}
			a := w.Weights[i] * cos * math.Sqrt(inv) * gaussWeight(math.Abs(d)*invS)
			v := complex(float32(a), 0) * dsp.Phasor(-f0*d)
			ft.idx = append(ft.idx, int32(i))
			ft.v = append(ft.v, v)
			ft.f0 += complex128(v)
			ft.mag += math.Abs(a)
		}
	}
	// exact-size copies (the buffers stay on the stack for the usual zone)
	ft.idx = append([]int32(nil), ft.idx...)
	ft.v = append([]complex64(nil), ft.v...)
	return ft
}

// FieldCache keeps the part of the transmit field delays (TransmitField)
// that does not depend on the corrections, per grid, wave and pixel, for
// models that differ only in their corrections: an iterative estimate
// re-forms the same grids with one profile after another. A cache serves
// one base model and one acquisition's events, and only beamformers (which
// ask by pixel); it is safe for their concurrent use.
type FieldCache struct {
	mu    sync.Mutex
	grids map[fieldKey][]*fieldTerms
	rx    map[rxKey]*rxTerms
}

// rxKey identifies a grid and the receive apodisation of a beamformer.
type rxKey struct {
	g      *Grid
	fnum   float64
	dscale float64
	win    dsp.Window
	cosMax float64
}

// rxTerms holds, per pixel of a grid and element, the base model's receive
// delay and the apodisation weight ([element * pixels + pixel]), which do
// not depend on the corrections; done marks the pixels filled. Each pixel
// is filled once, by the beamformer's tile that holds it, and read after
// the construction that filled it has finished.
type rxTerms struct {
	tau, wt []float64
	done    []bool
}

// receive returns the receive entries of grid g for apodizer ap.
func (fc *FieldCache) receive(g *Grid, ap *apodizer) *rxTerms {
	k := rxKey{g, ap.fnum, ap.dscale, ap.win, ap.cosMax}
	fc.mu.Lock()
	defer fc.mu.Unlock()
	if fc.rx == nil {
		fc.rx = map[rxKey]*rxTerms{}
	}
	r := fc.rx[k]
	if r == nil {
		n := g.Len() * len(ap.els)
		r = &rxTerms{tau: make([]float64, n), wt: make([]float64, n), done: make([]bool, g.Len())}
		fc.rx[k] = r
	}
	return r
}

// fieldKey identifies a grid and a wave, by its firing delays (the event's
// own slice).
type fieldKey struct {
	g *Grid
	d *float64
}

// NewFieldCache returns an empty cache.
func NewFieldCache() *FieldCache { return &FieldCache{grids: map[fieldKey][]*fieldTerms{}} }

// slots returns the grid's pixels' entries for wave w. Each entry is
// written once, by the beamformer's tile that holds the pixel, and read
// after the construction that wrote it has finished.
func (fc *FieldCache) slots(g *Grid, w *Wave) []*fieldTerms {
	k := fieldKey{g, &w.Delays[0]}
	fc.mu.Lock()
	defer fc.mu.Unlock()
	s := fc.grids[k]
	if s == nil {
		s = make([]*fieldTerms, g.Len())
		fc.grids[k] = s
	}
	return s
}

// transmitPixel is Transmit for pixel p of grid g through the field cache's
// entries slots (fieldSlots, not nil).
func (c *Corrected) transmitPixel(w *Wave, g *Grid, p int, slots []*fieldTerms) float64 {
	x, z := g.PX[p], g.PZ[p]
	t, xs := c.Base.Transmit(w, x, z)
	ft := slots[p]
	if ft == nil {
		ft = c.fieldTerms(w, x, z, t, xs)
		slots[p] = ft
	}
	return t + c.fieldFrom(ft, c.At(xs))
}

// fieldSlots returns the cache's entries for grid g and wave w when the
// model's field delays apply to w and it has a cache, else nil.
func (c *Corrected) fieldSlots(g *Grid, w *Wave) []*fieldTerms {
	if !c.fieldApplies(w) || c.Field.Cache == nil || len(w.Delays) == 0 {
		return nil
	}
	return c.Field.Cache.slots(g, w)
}

// gaussReach is where fieldDelay's envelope weight stops, in sigmas
// (exp(-4.5) = 1.1 % there).
const gaussReach = 3

// gaussTab holds exp(-u^2/2) for u = 0..gaussReach in gaussBins steps.
const gaussBins = 512

var gaussTab = func() []float64 {
	t := make([]float64, gaussBins+2)
	for k := range t {
		u := float64(k) * gaussReach / gaussBins
		t[k] = math.Exp(-u * u / 2)
	}
	return t
}()

// gaussWeight returns exp(-u^2/2) for 0 <= u <= gaussReach, interpolated
// linearly in the table (error below 5e-6).
func gaussWeight(u float64) float64 {
	x := u * (gaussBins / gaussReach)
	k := int(x)
	if k >= gaussBins {
		return gaussTab[gaussBins]
	}
	f := x - float64(k)
	return gaussTab[k] + f*(gaussTab[k+1]-gaussTab[k])
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
