package aberration

import (
	"math"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/recon"
)

// Curvature of the profile from the coherence of the events' images.
//
// A quadratic delay across the aperture moves the receive focus in depth,
// and a wire's echo, or speckle, looks as coherent across the elements at
// one depth as at another: the element-by-element estimates leave the
// quadratic part of the profile least determined, and behind sparse
// plane-wave compounding they get it wrong by tens of per cent of the
// screen. The same delay, applied on transmit, curves every steered
// wavefront, so the events' separate images, each focused on receive, line
// up in phase only at the right curvature. refineCurvature replaces the
// quadratic coefficient of the profile by the one that maximises that
// coherence (the transmit coherence of package speed) over the patches, at
// the bulk model's speed, when the sequence holds three or more plane or
// diverging waves.

// curvatureSteps is the number of coarse candidates; curvatureSpan the
// largest extra delay they put at the ends of the array, in periods.
const (
	curvatureSteps = 13
	curvatureSpan  = 0.5
)

// transmitCoherence returns sum_p |sum_e I_pe|^2 / (E sum_p sum_e |I_pe|^2)
// over the pixels of g for the delay model m.
func transmitCoherence(a *acq.Acquisition, ch *recon.Channels, m recon.DelayModel, cfg *Config, g *recon.Grid) (float64, error) {
	bf, err := recon.NewBeamformer(a, g, m, recon.Config{FNumber: cfg.FNumber, Window: dsp.Window{Kind: dsp.Boxcar},
		Events: cfg.Events, Workers: cfg.Workers})
	if err != nil {
		return 0, err
	}
	sum, power, err := bf.EventSums(ch)
	if err != nil {
		return 0, err
	}
	var coh, inc float64
	for p, v := range sum {
		coh += real(v)*real(v) + imag(v)*imag(v)
		inc += power[p]
	}
	if inc == 0 {
		return math.NaN(), nil
	}
	ne := len(bf.Events())
	return coh / (float64(ne) * inc), nil
}

// refineCurvature returns prof plus the quadratic d (x - xc)^2 / half^2
// (xc the array's centre, half its half-length) whose d maximises the
// transmit coherence over the patches' pixels, and whether it changed it
// (only when the coherence rises).
func refineCurvature(a *acq.Acquisition, ch *recon.Channels, cfg *Config, pds []*patchData, prof, x []float64, omega float64) ([]float64, bool, error) {
	var xs, zs []float64
	for _, pd := range pds {
		xs = append(xs, pd.xs...)
		zs = append(zs, pd.zs...)
	}
	g, err := recon.Points(xs, zs)
	if err != nil {
		return nil, false, err
	}
	// x^2 about the array's centre, scaled to 1 at its ends
	var xc, half float64
	for _, v := range x {
		xc += v
	}
	xc /= float64(len(x))
	for _, v := range x {
		half = math.Max(half, math.Abs(v-xc))
	}
	if half == 0 {
		return prof, false, nil
	}
	u := make([]float64, len(x))
	for j, v := range x {
		u[j] = (v - xc) * (v - xc) / (half * half)
	}
	eval := func(d float64) (float64, error) {
		p := make([]float64, len(prof))
		for j := range p {
			p[j] = prof[j] + d*u[j]
		}
		m, err := recon.NewCorrectedField(cfg.Model, p, cfg.field)
		if err != nil {
			return 0, err
		}
		return transmitCoherence(a, ch, m, cfg, &g)
	}
	period := 2 * math.Pi / omega
	step := 2 * curvatureSpan * period / float64(curvatureSteps-1)
	ds := make([]float64, curvatureSteps)
	vals := make([]float64, curvatureSteps)
	best := -1
	for i := range ds {
		ds[i] = -curvatureSpan*period + float64(i)*step
		v, err := eval(ds[i])
		if err != nil {
			return nil, false, err
		}
		vals[i] = v
		if !math.IsNaN(v) && (best < 0 || v > vals[best]) {
			best = i
		}
	}
	if best < 0 {
		return prof, false, nil
	}
	v0 := vals[(curvatureSteps-1)/2] // d = 0: the profile as estimated
	// a fine grid of a quarter step around the best, then a parabola
	// through the best fine point and its neighbours
	c := ds[best]
	fine := []float64{c - step/2, c - step/4, c, c + step/4, c + step/2}
	fv := make([]float64, len(fine))
	fb := 2
	for i, f := range fine {
		if i == 2 {
			fv[i] = vals[best]
			continue
		}
		if fv[i], err = eval(f); err != nil {
			return nil, false, err
		}
	}
	for i := range fv {
		if fv[i] > fv[fb] {
			fb = i
		}
	}
	d, v := fine[fb], fv[fb]
	if fb > 0 && fb < len(fine)-1 {
		y0, y1, y2 := fv[fb-1], fv[fb], fv[fb+1]
		if den := y0 - 2*y1 + y2; den < 0 {
			dp := d + step/4*0.5*(y0-y2)/den
			vp, err := eval(dp)
			if err != nil {
				return nil, false, err
			}
			if vp > v {
				d, v = dp, vp
			}
		}
	}
	if !(v > v0) {
		return prof, false, nil
	}
	out := make([]float64, len(prof))
	for j := range out {
		out[j] = prof[j] + d*u[j]
	}
	return out, true, nil
}
