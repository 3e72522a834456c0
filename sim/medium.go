package sim

import (
	"fmt"
	"math"

	"celerity/acq"
)

// Medium is the propagation medium: horizontal layers from the array face
// downwards (a homogeneous medium is one layer), with an optional attenuation
// slope. The first layer also fills the space above z = 0 where the elements
// of a curved array sit.
type Medium struct {
	Layers                []acq.Layer
	AttenuationDBPerCmMHz float64
}

// Homogeneous returns a homogeneous medium of speed c.
func Homogeneous(c float64) Medium { return Medium{Layers: []acq.Layer{{SpeedMPS: c}}} }

// Layered returns a medium of horizontal layers; the last has no thickness.
func Layered(layers ...acq.Layer) Medium { return Medium{Layers: layers} }

// Validate checks speeds and thicknesses.
func (m *Medium) Validate() error {
	if len(m.Layers) == 0 {
		return fmt.Errorf("medium: no speed of sound given")
	}
	for i, l := range m.Layers {
		if !(l.SpeedMPS >= 300 && l.SpeedMPS <= 10000) {
			return fmt.Errorf("medium: layer %d: speed must be between 300 and 10000 m/s, got %g", i, l.SpeedMPS)
		}
		if i < len(m.Layers)-1 && !(l.ThicknessM > 0) {
			return fmt.Errorf("medium: layer %d: thickness must be positive, got %g", i, l.ThicknessM)
		}
	}
	if m.AttenuationDBPerCmMHz < 0 || m.AttenuationDBPerCmMHz > 20 {
		return fmt.Errorf("medium: attenuation must be between 0 and 20 dB/cm/MHz, got %g", m.AttenuationDBPerCmMHz)
	}
	return nil
}

// MinSpeed returns the slowest layer speed.
func (m *Medium) MinSpeed() float64 {
	v := math.Inf(1)
	for _, l := range m.Layers {
		v = math.Min(v, l.SpeedMPS)
	}
	return v
}

// MeanSpeed returns the vertical time-average speed down to depth z.
func (m *Medium) MeanSpeed(z float64) float64 {
	t := acq.Truth{Layers: m.Layers}
	if len(m.Layers) == 1 {
		return m.Layers[0].SpeedMPS
	}
	return t.MeanSpeed(z)
}

// ray is the geometric ray between an element and a point.
type ray struct {
	T float64 // travel time, s
	L float64 // path length, m
	// DX, DZ is the unit direction in which the ray leaves the element.
	DX, DZ float64
}

// tracer computes rays through the medium. The zero value is not usable; use
// newTracer. It is not safe for concurrent use (it keeps a warm start).
type tracer struct {
	v   []float64 // layer speeds
	bot []float64 // layer bottoms (last is +Inf)
	h   []float64 // scratch: vertical thickness crossed in each layer
	q   float64   // warm start: sin of the angle in the fastest crossed layer
}

func newTracer(m *Medium) *tracer {
	t := &tracer{}
	z := 0.0
	for i, l := range m.Layers {
		t.v = append(t.v, l.SpeedMPS)
		if i == len(m.Layers)-1 {
			t.bot = append(t.bot, math.Inf(1))
		} else {
			z += l.ThicknessM
			t.bot = append(t.bot, z)
		}
	}
	t.h = make([]float64, len(t.v))
	return t
}

// trace returns the ray from (ex, ez) to (px, pz), pz >= ez.
//
// Homogeneous: a straight line, T = r / c. Layered: the Snell ray, found by
// solving for the ray parameter p (horizontal slowness, conserved across flat
// interfaces) the offset equation
//
//	X(p) = sum_k h_k p v_k / sqrt(1 - p^2 v_k^2) = |px - ex|
//
// by safeguarded Newton iteration; then T = sum_k h_k / (v_k sqrt(1 - p^2 v_k^2)),
// which by Fermat's principle is the minimum travel time between the points.
func (t *tracer) trace(ex, ez, px, pz float64) ray {
	dx, dz := px-ex, pz-ez
	if len(t.v) == 1 {
		r := math.Hypot(dx, dz)
		if r == 0 {
			return ray{DZ: 1}
		}
		return ray{T: r / t.v[0], L: r, DX: dx / r, DZ: dz / r}
	}
	// vertical thickness crossed in each layer
	top := math.Inf(-1)
	vmax := 0.0
	first := -1
	for k := range t.v {
		lo := math.Max(top, ez)
		hi := math.Min(t.bot[k], pz)
		if hi > lo {
			t.h[k] = hi - lo
			vmax = math.Max(vmax, t.v[k])
			if first < 0 {
				first = k
			}
		} else {
			t.h[k] = 0
		}
		top = t.bot[k]
	}
	D := math.Abs(dx)
	if first < 0 {
		// same depth: a horizontal path in the element's layer
		k := t.layerOf(ez)
		sx := 1.0
		if dx < 0 {
			sx = -1
		}
		return ray{T: D / t.v[k], L: D, DX: sx}
	}
	if D == 0 {
		var T, L float64
		for k, h := range t.h {
			T += h / t.v[k]
			L += h
		}
		return ray{T: T, L: L, DZ: 1}
	}
	// Solve X(q) = D for q = p vmax in [0, 1).
	X := func(q float64) (x, dxdq float64) {
		for k, h := range t.h {
			if h == 0 {
				continue
			}
			s := q * t.v[k] / vmax // sin of the angle in layer k
			c2 := 1 - s*s
			c := math.Sqrt(c2)
			x += h * s / c
			dxdq += h * (t.v[k] / vmax) / (c2 * c)
		}
		return
	}
	lo, hi := 0.0, 1.0
	q := t.q
	if !(q > 0 && q < 1) {
		q = D / math.Hypot(D, pz-ez)
	}
	for it := 0; it < 100; it++ {
		x, d := X(q)
		f := x - D
		if math.Abs(f) <= 1e-13+1e-12*D {
			break
		}
		if f > 0 {
			hi = q
		} else {
			lo = q
		}
		nq := q - f/d
		if !(nq > lo && nq < hi) {
			nq = (lo + hi) / 2
		}
		if nq == q {
			break
		}
		q = nq
	}
	t.q = q
	var T, L float64
	for k, h := range t.h {
		if h == 0 {
			continue
		}
		s := q * t.v[k] / vmax
		c := math.Sqrt(1 - s*s)
		T += h / (t.v[k] * c)
		L += h / c
	}
	s0 := q * t.v[first] / vmax
	sx := 1.0
	if dx < 0 {
		sx = -1
	}
	return ray{T: T, L: L, DX: sx * s0, DZ: math.Sqrt(1 - s0*s0)}
}

func (t *tracer) layerOf(z float64) int {
	for k, b := range t.bot {
		if z < b {
			return k
		}
	}
	return len(t.bot) - 1
}

// TravelTime returns the one-way travel time in s between an element at
// (ex, ez) and a point (px, pz) below it, along the Snell ray.
func (m *Medium) TravelTime(ex, ez, px, pz float64) float64 {
	return newTracer(m).trace(ex, ez, px, pz).T
}
