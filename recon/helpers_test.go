package recon_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"celerity/acq"
	"celerity/recon"
	"celerity/sim"
)

// Shared test set-up: simulated acquisitions from the independent forward
// model in package sim (its own straight-ray and Snell-ray travel times), so
// that an error in recon's delay models shows up as a misplaced or blurred
// image rather than cancelling out.

const (
	fsHz  = 20e6 // RF sampling rate: four samples per period at 5 MHz
	c1540 = 1540.0
)

// probeN returns the 5 MHz, 0.3 mm pitch, 70 % bandwidth linear preset cut
// down to n elements (still centred on x = 0).
func probeN(t testing.TB, n int) acq.Probe {
	t.Helper()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	p.Count = n
	return p
}

// drawScreen draws a phase screen over probe p's elements (sim.DrawScreen:
// rms in s, correlation length in m) from the seed.
func drawScreen(t testing.TB, p acq.Probe, rms, corr float64, seed uint64) []float64 {
	t.Helper()
	els := p.Elements()
	pos := make([]float64, len(els))
	for i, e := range els {
		pos[i] = e.X
	}
	screen, err := sim.DrawScreen(rand.New(rand.NewPCG(seed, seed+1)), pos, rms, corr)
	if err != nil {
		t.Fatal(err)
	}
	return screen
}

// lambda returns the centre wavelength of probe p at speed c.
func lambda(p acq.Probe, c float64) float64 { return c / p.CenterFrequencyHz }

// simSpec describes one simulated acquisition.
type simSpec struct {
	probe    acq.Probe
	events   []acq.Event
	assumed  float64 // speed the firing delays were computed for; 0 means 1540
	medium   sim.Medium
	screen   []float64
	targets  [][2]float64
	scatter  []sim.Scatterer // added to the targets
	maxDepth float64         // deepest point that must be recorded, m
}

// simulate runs the simulator and returns the RF acquisition. The record is
// long enough for the latest firing delay plus the longest two-way path to
// maxDepth at the medium's slowest speed, plus the pulse.
func simulate(t testing.TB, s simSpec) *acq.Acquisition {
	t.Helper()
	if s.assumed == 0 {
		s.assumed = c1540
	}
	var sc []sim.Scatterer
	for _, p := range s.targets {
		sc = append(sc, sim.Scatterer{X: p[0], Z: p[1], Amp: 1})
	}
	sc = append(sc, s.scatter...)
	dmax := 0.0
	for _, ev := range s.events {
		for _, d := range ev.Delays {
			dmax = math.Max(dmax, d)
		}
	}
	scr := 0.0
	for _, v := range s.screen {
		scr = math.Max(scr, math.Abs(v))
	}
	path := 2 * math.Hypot(s.maxDepth, s.probe.Aperture())
	ns := int(math.Ceil((dmax + 2*scr + path/s.medium.MinSpeed() + 2e-6) * fsHz))
	cfg := &sim.Config{Probe: s.probe, Events: s.events, AssumedSpeedMPS: s.assumed, SamplingRateHz: fsHz,
		NumSamples: ns, Medium: s.medium, Screen: s.screen, Scatterers: sc}
	a, err := sim.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return a
}

// form beamforms a on g with model m and returns the complex image.
func form(t testing.TB, a *acq.Acquisition, g *recon.Grid, m recon.DelayModel, cfg recon.Config) []complex64 {
	t.Helper()
	ch, err := recon.Prepare(a)
	if err != nil {
		t.Fatal(err)
	}
	bf, err := recon.NewBeamformer(a, g, m, cfg)
	if err != nil {
		t.Fatal(err)
	}
	img, err := bf.Form(nil, ch)
	if err != nil {
		t.Fatal(err)
	}
	return img
}

// envelope beamforms and returns the envelope.
func envelope(t testing.TB, a *acq.Acquisition, g *recon.Grid, m recon.DelayModel, cfg recon.Config) []float64 {
	t.Helper()
	return recon.Envelope(form(t, a, g, m, cfg))
}

// rectAround returns a rectangular grid of half-size hx by hz (m) around
// (x, z) with spacing d, so that (x, z) falls on a pixel.
func rectAround(t testing.TB, x, z, hx, hz, d float64) recon.Grid {
	t.Helper()
	nx, nz := math.Round(hx/d), math.Round(hz/d)
	g, err := recon.NewRect(x-nx*d, x+nx*d+d/2, d, z-nz*d, z+nz*d+d/2, d)
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// peak2D returns the position and value of the envelope maximum of a
// rectangular grid, refined by the least-squares quadratic surface
//
//	ln v(u, w) = a + b u + c w + d u^2 + e u w + f w^2
//
// through the 5 x 5 pixels around the brightest pixel (u, w in pixels along
// x and z). The logarithm makes the fit exact for a Gaussian spot, and the
// cross term follows the tilted spot of a steered wave. Near the grid edge,
// or when the surface has no maximum within the stencil, the brightest
// pixel itself is returned.
func peak2D(env []float64, g *recon.Grid) (x, z, v float64) {
	const k = 2 // stencil half-size, pixels
	best := 0
	for i, e := range env {
		if e > env[best] {
			best = i
		}
	}
	r, c := best/g.Cols, best%g.Cols
	x, z, v = g.X[c], g.Z[r], env[best]
	if r < k || c < k || r >= g.Rows-k || c >= g.Cols-k {
		return x, z, v
	}
	// Moments of the stencil: the normal equations split into b, c and e
	// alone and a 3 x 3 system in a, d, f.
	var s0, su, sw, suu, sww, suw float64
	for dw := -k; dw <= k; dw++ {
		for du := -k; du <= k; du++ {
			y := env[(r+dw)*g.Cols+c+du]
			if !(y > 0) {
				return x, z, v
			}
			y = math.Log(y)
			u, w := float64(du), float64(dw)
			s0 += y
			su += u * y
			sw += w * y
			suu += u * u * y
			sww += w * w * y
			suw += u * w * y
		}
	}
	var m1, m2, m4 float64 // 1-D sums over -k..k of 1, u^2, u^4
	for u := -k; u <= k; u++ {
		m1++
		m2 += float64(u * u)
		m4 += float64(u * u * u * u)
	}
	n, s2, s4, s22 := m1*m1, m1*m2, m1*m4, m2*m2
	b, cc, e := su/s2, sw/s2, suw/s22
	// [n s2 s2; s2 s4 s22; s2 s22 s4] [a d f]' = [s0 suu sww]'
	// By symmetry, d + f and d - f decouple.
	dm := (suu - sww) / (s4 - s22)
	// n a + s2 p = s0, s2 a + (s4 + s22)/2 p = (suu + sww)/2 with p = d + f
	det3 := n*(s4+s22)/2 - s2*s2
	p := (n*(suu+sww)/2 - s2*s0) / det3
	a := (s0 - s2*p) / n
	d, f := (p+dm)/2, (p-dm)/2
	// Stationary point: [2d e; e 2f] [u w]' = -[b c]'.
	det := 4*d*f - e*e
	if !(det > 0) || !(d < 0) {
		return x, z, v
	}
	u := (-2*f*b + e*cc) / det
	w := (-2*d*cc + e*b) / det
	if math.Abs(u) > k || math.Abs(w) > k {
		return x, z, v
	}
	dx := g.X[1] - g.X[0]
	dz := g.Z[1] - g.Z[0]
	return x + u*dx, z + w*dz, math.Exp(a + b*u + cc*w + d*u*u + e*u*w + f*w*w)
}

// rowThrough returns the envelope row of grid g nearest depth z.
func rowThrough(env []float64, g *recon.Grid, z float64) []float64 {
	r := int(math.Round((z - g.Z[0]) / (g.Z[1] - g.Z[0])))
	r = min(max(r, 0), g.Rows-1)
	return env[r*g.Cols : (r+1)*g.Cols]
}

// colThrough returns the envelope column of grid g nearest x.
func colThrough(env []float64, g *recon.Grid, x float64) []float64 {
	c := int(math.Round((x - g.X[0]) / (g.X[1] - g.X[0])))
	c = min(max(c, 0), g.Cols-1)
	out := make([]float64, g.Rows)
	for r := range out {
		out[r] = env[r*g.Cols+c]
	}
	return out
}
