package recon_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/recon"
	"celerity/sim"
)

// apertureAcq is a small acquisition with data everywhere: three plane
// waves on a point target in speckle, 32 elements.
func apertureAcq(t *testing.T) *acq.Acquisition {
	t.Helper()
	p := probeN(t, 32)
	lat, ax := sim.ResolutionCell(sim.Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}, c1540)
	sc, err := sim.Speckle(rand.New(rand.NewPCG(5, 6)), sim.Region{X0: -0.004, X1: 0.004, Z0: 0.006, Z1: 0.014}, 5, lat*ax)
	if err != nil {
		t.Fatal(err)
	}
	return simulate(t, simSpec{probe: p, events: acq.PlaneWaveSequence(&p, []float64{-6, 0, 6}, c1540),
		medium: sim.Homogeneous(c1540), targets: [][2]float64{{0.0005, 0.01}}, scatter: sc, maxDepth: 0.015})
}

// TestApertureSumsToForm: summing each pixel's aperture-domain row over the
// elements gives Form's value, for every window, interpolation and event
// subset; elements outside ApertureMask hold exactly zero.
func TestApertureSumsToForm(t *testing.T) {
	t.Parallel()
	a := apertureAcq(t)
	ch, err := recon.Prepare(a)
	if err != nil {
		t.Fatal(err)
	}
	g := rectAround(t, 0.0005, 0.01, 0.002, 0.003, 0.1e-3)
	nn := a.NumElements()
	for _, tc := range []struct {
		name   string
		cfg    recon.Config
		subset []int
	}{
		{"F/1.5 boxcar linear", recon.Config{FNumber: 1.5}, nil},
		{"F/1 Hann cubic", recon.Config{FNumber: 1, Window: dsp.Window{Kind: dsp.Hann}, Interp: recon.Cubic}, nil},
		{"full aperture Tukey, two events", recon.Config{Window: dsp.Window{Kind: dsp.Tukey, Alpha: 0.5}}, []int{0, 2}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			bf, err := recon.NewBeamformer(a, &g, recon.NewHomogeneous(c1540, a.Probe.Elements()), tc.cfg)
			if err != nil {
				t.Fatal(err)
			}
			img, err := bf.FormEvents(nil, ch, tc.subset)
			if err != nil {
				t.Fatal(err)
			}
			ap, err := bf.Aperture(nil, ch, tc.subset)
			if err != nil {
				t.Fatal(err)
			}
			mask := bf.ApertureMask()
			if len(ap) != g.Len()*nn || len(mask) != len(ap) {
				t.Fatalf("aperture %d and mask %d values, want %d", len(ap), len(mask), g.Len()*nn)
			}
			// rel: the two sums of about 100 float32 products are taken in
			// different orders; each rounding is 6e-8 of its partial sum,
			// so 1e-5 of the sum of magnitudes bounds the difference.
			const rel = 1e-5
			worst := 0.0
			active := 0
			for p := range g.Len() {
				var sum complex128
				mag := 0.0
				for j := range nn {
					v := ap[p*nn+j]
					if !mask[p*nn+j] && v != 0 {
						t.Fatalf("pixel %d element %d: %v outside the aperture mask", p, j, v)
					}
					if mask[p*nn+j] {
						active++
					}
					sum += complex128(v)
					mag += cabs(v)
				}
				d := math.Hypot(real(sum)-float64(real(img[p])), imag(sum)-float64(imag(img[p])))
				if d > rel*mag {
					t.Fatalf("pixel %d: aperture sum %v, Form %v (difference %.3g of %.3g)", p, sum, img[p], d, mag)
				}
				worst = math.Max(worst, d/math.Max(mag, 1e-30))
			}
			if active == 0 {
				t.Fatal("no element takes part anywhere")
			}
			t.Logf("largest difference %.2g of the sum of magnitudes; %.1f elements per pixel", worst, float64(active)/float64(g.Len()))
		})
	}
}

// TestApertureMaskRule checks ApertureMask against the receive rule
// written out here: element j takes part for a pixel at (x, z) when
// |x_j - x| <= z / (2 F) and it sees the pixel within its directivity
// cut-off, the -6 dB angle of sinc(w sin(theta) / lambda):
// sin(theta) = 0.6034 lambda / w (sinc(u) = 1/2 at u = 0.6034, derived).
func TestApertureMaskRule(t *testing.T) {
	t.Parallel()
	p := probeN(t, 48)
	els := p.Elements()
	a := &acq.Acquisition{Probe: p, SamplingRateHz: fsHz, AssumedSpeedMPS: c1540, Kind: acq.RF,
		Events: acq.PlaneWaveSequence(&p, []float64{0}, c1540), NumSamples: 100}
	g, err := recon.NewRect(-0.006, 0.006, 0.13e-3, 0.001, 0.02, 0.17e-3)
	if err != nil {
		t.Fatal(err)
	}
	maxSin := 0.6034 * lambda(p, c1540) / p.ElementWidthM
	for _, tc := range []struct {
		fnum float64
		deg  float64 // MaxAngleDeg
	}{{1.5, 0}, {0.7, 0}, {2, -1}, {0, 0}, {0, 20}} {
		bf, err := recon.NewBeamformer(a, &g, recon.NewHomogeneous(c1540, els), recon.Config{FNumber: tc.fnum, MaxAngleDeg: tc.deg})
		if err != nil {
			t.Fatal(err)
		}
		mask := bf.ApertureMask()
		bad, edge := 0, 0
		for i := range g.Len() {
			x, z := g.PX[i], g.PZ[i]
			for j, e := range els {
				in := true
				u := 0.0
				if tc.fnum > 0 {
					u = math.Abs(e.X-x) / (z / (2 * tc.fnum))
					in = u <= 1
				}
				sin := math.Abs(e.X-x) / math.Hypot(e.X-x, z)
				sinMax := maxSin
				if tc.deg > 0 {
					sinMax = math.Sin(tc.deg * math.Pi / 180)
				} else if tc.deg < 0 {
					sinMax = 2
				}
				in = in && sin <= sinMax
				// skip elements within rounding of either boundary
				if math.Abs(u-1) < 1e-9 || math.Abs(sin-sinMax) < 1e-9 {
					edge++
					continue
				}
				if mask[i*len(els)+j] != in {
					bad++
					if bad <= 3 {
						t.Errorf("F %g, max angle %g: pixel (%.3f, %.3f) mm, element %d (%.3f mm): mask %v, rule %v",
							tc.fnum, tc.deg, x*1e3, z*1e3, j, e.X*1e3, mask[i*len(els)+j], in)
					}
				}
			}
		}
		if bad > 0 {
			t.Errorf("F %g, max angle %g: %d mismatches (%d boundary cases skipped)", tc.fnum, tc.deg, bad, edge)
		}
	}
}

// TestIQMatchesRF: IQ channel data (sim.ToIQ, the acquisition folder's IQ
// convention) give the same image as the RF they came from. With the
// probe's centre frequency as demodulation frequency the baseband samples
// are those Prepare makes from RF; with another one the beamformer's
// phase rotations undo the difference, up to the interpolation of a
// baseband signal that is no longer centred.
func TestIQMatchesRF(t *testing.T) {
	t.Parallel()
	a := apertureAcq(t)
	g := rectAround(t, 0.0005, 0.01, 0.002, 0.002, 0.03e-3)
	for _, tc := range []struct {
		name string
		fd   float64
		cfg  recon.Config
		tol  float64
	}{
		// Task: 1e-3 relative; the same float32 operations run on the
		// same samples, so the images agree to rounding.
		{"centre frequency, linear", 5e6, recon.Config{FNumber: 1.5}, 1e-3},
		{"centre frequency, cubic", 5e6, recon.Config{FNumber: 1.5, Interp: recon.Cubic}, 1e-3},
		// 4.5 MHz: the images differ by the difference of two cubic
		// interpolation errors on basebands centred 0.5 MHz apart. Keys'
		// kernel is third-order accurate, with errors of order 1e-2 at
		// the band edge (2.3 MHz, f/fs = 0.11) and far less at the band
		// centre; measured 1.7e-3 rms, so 5e-3 leaves room.
		{"4.5 MHz, cubic", 4.5e6, recon.Config{FNumber: 1.5, Interp: recon.Cubic}, 5e-3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			iq, err := sim.ToIQ(a, tc.fd)
			if err != nil {
				t.Fatal(err)
			}
			m := recon.NewHomogeneous(c1540, a.Probe.Elements())
			rf := form(t, a, &g, m, tc.cfg)
			got := form(t, iq, &g, m, tc.cfg)
			var num, den float64
			for i := range rf {
				d := rf[i] - got[i]
				num += float64(real(d)*real(d) + imag(d)*imag(d))
				den += float64(real(rf[i])*real(rf[i]) + imag(rf[i])*imag(rf[i]))
			}
			rel := math.Sqrt(num / den)
			if !(rel <= tc.tol) {
				t.Errorf("IQ image differs from RF by %.3g (relative rms), limit %g", rel, tc.tol)
			}
			t.Logf("relative rms difference %.2g", rel)
		})
	}
}

// TestCubicMatchesLinear: on a point target sampled at four samples per
// period, linear and cubic interpolation of the baseband give the same
// envelope within a few percent, and the linear one's small loss of peak
// amplitude is the one its frequency response predicts.
func TestCubicMatchesLinear(t *testing.T) {
	t.Parallel()
	p := probeN(t, 64)
	tgt := [2]float64{0.001, 0.015}
	a := simulate(t, simSpec{probe: p, events: acq.PlaneWaveSequence(&p, acq.SpreadAngles(3, 6), c1540),
		medium: sim.Homogeneous(c1540), targets: [][2]float64{tgt}, maxDepth: 0.017})
	g := rectAround(t, tgt[0], tgt[1], 0.001, 0.001, lambda(p, c1540)/10)
	m := recon.NewHomogeneous(c1540, p.Elements())
	lin := envelope(t, a, &g, m, recon.Config{FNumber: 1.5})
	cub := envelope(t, a, &g, m, recon.Config{FNumber: 1.5, Interp: recon.Cubic})
	xl, zl, pl := peak2D(lin, &g)
	xc, zc, pc := peak2D(cub, &g)
	var num, den float64
	for i := range lin {
		num += (lin[i] - cub[i]) * (lin[i] - cub[i])
		den += cub[i] * cub[i]
	}
	rel := math.Sqrt(num / den)
	// Derived: linear interpolation at fractional offset f scales a
	// baseband tone of frequency nu (cycles per sample) by about
	// 1 - (2 pi nu)^2 f (1 - f) / 2; the offsets of the many channels summed
	// are spread evenly (mean f (1 - f) = 1/6), and the pulse's amplitude
	// spectrum is Gaussian with sigma_f = B f0 / (2 sqrt(2 ln 2)) (sim.Pulse),
	// so the linear peak is 1 - pi^2 (sigma_f / fs)^2 / 3 of the exact one.
	// Cubic (Keys) interpolation errs at fourth order: it stands in for exact.
	sf := sim.Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}.SigmaF()
	wantRatio := 1 - math.Pi*math.Pi*(sf/fsHz)*(sf/fsHz)/3
	t.Logf("peak linear %.2f, cubic %.2f (ratio %.4f, derived %.4f); positions differ by (%.2f, %.2f) um; envelopes differ by %.3g rms",
		pl, pc, pl/pc, wantRatio, (xl-xc)*1e6, (zl-zc)*1e6, rel)
	// ratioTol: the second-order expansion and the finite, not quite even
	// spread of offsets over about 60 channels and 3 events.
	const ratioTol = 0.005
	if math.Abs(pl/pc-wantRatio) > ratioTol {
		t.Errorf("peak ratio linear/cubic %.4f, derived %.4f (limit %g)", pl/pc, wantRatio, ratioTol)
	}
	// "A few percent" (task): the linear image is the cubic one scaled by
	// about 2 % (above) with small differences in shape.
	const rmsTol = 0.03
	if rel > rmsTol {
		t.Errorf("envelopes differ by %.3g rms (limit %g)", rel, rmsTol)
	}
	// posTol: both kernels interpolate the same symmetric pulse; a
	// fortieth of a wavelength (8 um) is far above the measured 0.1 um.
	posTol := lambda(p, c1540) / 40
	if d := math.Hypot(xl-xc, zl-zc); d > posTol {
		t.Errorf("peaks %.1f um apart", d*1e6)
	}
}
