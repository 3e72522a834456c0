package aberration_test

import (
	"math"
	"slices"
	"strings"
	"testing"

	"celerity/aberration"
	"celerity/acq"
	"celerity/metrics"
	"celerity/recon"
	"celerity/sim"
)

// The accuracy targets of the issue: the estimated profile against the true
// screen, both with mean and linear trend removed (metrics.ProfileError).
const (
	// wire in speckle: rms error at most 10 % of the true rms, correlation at
	// least 0.95 (issue requirement)
	maxErrWire  = 0.10
	minCorrWire = 0.95
	// speckle only: rms error at most 25 %, correlation at least 0.9 (issue
	// requirement)
	maxErrSpeckle  = 0.25
	minCorrSpeckle = 0.90
)

// The reduced cases share one seed each; the screens are of the size met in
// the chest and abdominal walls: tens of ns rms, 2.5-6 mm correlation length
// (Hinkelman et al., JASA 1994 and 1997; CHECKS.md).
var (
	saWire      = caseSpec{Seed: 101, Transmit: synthetic, RMSNS: 40, CorrMM: 3, Wire: true}
	saWireClean = caseSpec{Seed: 101, Transmit: synthetic, Wire: true} // the same phantom and noise, no screen
	saSpeckle   = caseSpec{Seed: 102, Transmit: synthetic, RMSNS: 30, CorrMM: 3}
	pwSpeckle   = caseSpec{Seed: 103, Transmit: planeWaves, RMSNS: 30, CorrMM: 3}
)

// A wire in speckle behind a 40 ns, 3 mm screen, synthetic aperture.
func TestWireSyntheticAperture(t *testing.T) {
	t.Parallel()
	f := simulate(t, saWire)
	for _, m := range []aberration.Method{aberration.Beamsum, aberration.Pairs} {
		t.Run(m.String(), func(t *testing.T) {
			res := estimate(t, f, m)
			e, r := score(f, res.ProfileS)
			t.Logf("%v: rms error %.1f %% of the true rms (%.2f ns), correlation %.4f, %d iterations, coherence factor %.3f -> %.3f",
				m, 100*e, e*rmsOf(detrended(f))*1e9, r, res.Iterations, res.Before.CoherenceFactor, res.After.CoherenceFactor)
			if e > maxErrWire || !(r >= minCorrWire) {
				t.Errorf("%v: rms error %.1f %% (want <= %.0f %%), correlation %.4f (want >= %.2f)", m, 100*e, 100*maxErrWire, r, minCorrWire)
			}
			if !res.Isoplanatic {
				t.Errorf("%v: a screen at the array is the same for every patch, but the patches disagree by %.2f", m, res.Disagreement)
			}
		})
	}
}

// Speckle only behind a 30 ns, 3 mm screen: the default method (beamsum) on
// synthetic aperture and on 11 compounded plane waves, and the many-pairs
// method on synthetic aperture. The nearest-neighbour method is reported,
// not held to the target: integrating neighbour differences accumulates
// their errors as a random walk.
func TestSpeckle(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		spec   caseSpec
		method aberration.Method
		target bool
	}{
		{saSpeckle, aberration.Beamsum, true},
		{saSpeckle, aberration.Pairs, true},
		{pwSpeckle, aberration.Beamsum, true},
		{pwSpeckle, aberration.Pairs, true},
		{saSpeckle, aberration.Neighbour, true},
		{pwSpeckle, aberration.Neighbour, true},
	} {
		t.Run(tc.spec.String()+"/"+tc.method.String(), func(t *testing.T) {
			f := simulate(t, tc.spec)
			res := estimate(t, f, tc.method)
			e, r := score(f, res.ProfileS)
			t.Logf("rms error %.1f %% of the true rms, correlation %.4f, %d iterations, coherence factor %.3f -> %.3f, notes %q",
				100*e, r, res.Iterations, res.Before.CoherenceFactor, res.After.CoherenceFactor, res.Notes)
			if tc.target && (e > maxErrSpeckle || !(r >= minCorrSpeckle)) {
				t.Errorf("rms error %.1f %% (want <= %.0f %%), correlation %.4f (want >= %.2f)", 100*e, 100*maxErrSpeckle, r, minCorrSpeckle)
			}
		})
	}
}

// After correction, the wire's lateral -6 dB width comes back to within
// 10 % of the width without a screen.
func TestCorrectionRestoresWireWidth(t *testing.T) {
	t.Parallel()
	// widthTol: the requirement.
	const widthTol = 0.10
	f := simulate(t, saWire)
	clean := simulate(t, saWireClean)
	res := estimate(t, f, aberration.Beamsum)
	corrected, err := recon.NewCorrected(f.model(), res.ProfileS)
	if err != nil {
		t.Fatal(err)
	}
	// search: the wire moves by well under a millimetre (the screen's trend,
	// which the profile leaves out, steers the image slightly)
	const search = 1e-3
	ref := metrics.PointTarget(wireImage(t, clean, clean.model()), wireX, wireZ, search)
	before := metrics.PointTarget(wireImage(t, f, f.model()), wireX, wireZ, search)
	after := metrics.PointTarget(wireImage(t, f, corrected), wireX, wireZ, search)
	if !ref.OK || !after.OK {
		t.Fatalf("wire not measured: no screen %+v, corrected %+v", ref, after)
	}
	lambda := c1540 / f.a.Probe.CenterFrequencyHz
	t.Logf("lateral -6 dB width: no screen %.3f mm (0.886 lambda F# = %.3f mm), behind the screen %.3f mm (ok %v), corrected %.3f mm",
		ref.LateralWidth*1e3, 0.886*lambda*1.5*1e3, before.LateralWidth*1e3, before.OK, after.LateralWidth*1e3)
	if d := after.LateralWidth/ref.LateralWidth - 1; math.Abs(d) > widthTol {
		t.Errorf("corrected width %.3f mm differs from the screen-free %.3f mm by %.1f %% (want within %.0f %%)",
			after.LateralWidth*1e3, ref.LateralWidth*1e3, 100*d, 100*widthTol)
	}
	if before.OK && before.LateralWidth < after.LateralWidth {
		t.Errorf("the screen did not widen the wire (%.3f mm before, %.3f mm after correction): the case tests nothing", before.LateralWidth*1e3, after.LateralWidth*1e3)
	}
}

// maxFloorS bounds the profile estimated without a screen: a tenth of the
// weakest chest-wall screens (21 ns rms, Hinkelman, Szabo & Waag 1997), and
// 5 % of the 40 ns screen of the wire test, half its tolerance.
const maxFloorS = 2e-9

// Without a screen the profile is near zero: what remains is the
// estimator's own noise floor.
func TestScreenFree(t *testing.T) {
	t.Parallel()
	f := simulate(t, saWireClean)
	res := estimate(t, f, aberration.Beamsum)
	t.Logf("profile rms %.3f ns, mean %.3f ns, trend %.4f ns/mm, coherence factor %.3f -> %.3f, %d iterations",
		res.RMSS*1e9, res.MeanS*1e9, res.TrendSPerM*1e6, res.Before.CoherenceFactor, res.After.CoherenceFactor, res.Iterations)
	if res.RMSS > maxFloorS {
		t.Errorf("profile rms %.2f ns without a screen, want <= %.1f ns", res.RMSS*1e9, maxFloorS*1e9)
	}
}

// The mean and the linear trend are not focusing errors (a common delay
// shifts the image in depth, a slope steers it; the data do not determine
// them): they are removed from the profile and reported, and no step of the
// estimate carries them. Started from a constant c0 and a slope s0
// (Initial) on data without a screen, the estimate reports c0 and s0 and a
// profile as near zero as without them.
func TestMeanAndTrend(t *testing.T) {
	t.Parallel()
	const (
		c0 = 25e-9  // s
		s0 = 0.5e-6 // s per m: 0.5 ns per mm, +/-9.5 ns across the array
	)
	f := simulate(t, saWireClean)
	init := make([]float64, len(f.x))
	for j, x := range f.x {
		init[j] = c0 + s0*x
	}
	res, err := aberration.Estimate(f.a, f.ch, aberration.Config{Model: f.model(), Initial: init})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("mean %.6f ns (started at %.1f), trend %.6f ns/mm (started at %.2f), profile rms %.3f ns",
		res.MeanS*1e9, c0*1e9, res.TrendSPerM*1e6, s0*1e6, res.RMSS*1e9)
	// roundS: rounding of sums of a few ns over 128 elements and a few
	// rounds, with a wide margin
	const roundS = 1e-15
	halfArray := f.x[len(f.x)-1]
	// Derived: every step is free of mean and trend over the elements it
	// sees (all of them here), so the raw estimate keeps those of Initial.
	if math.Abs(res.MeanS-c0) > roundS || math.Abs((res.TrendSPerM-s0)*halfArray) > roundS {
		t.Errorf("mean %.6f ns, trend %.6f ns/mm; want the initial %.1f ns and %.2f ns/mm", res.MeanS*1e9, res.TrendSPerM*1e6, c0*1e9, s0*1e6)
	}
	// Derived: MeanS and TrendSPerM are the least-squares constant and slope
	// of RawS (element positions centred on 0), so RawS = ProfileS + MeanS +
	// TrendSPerM x, and ProfileS has neither mean nor trend.
	for j, x := range f.x {
		if d := res.RawS[j] - (res.ProfileS[j] + res.MeanS + res.TrendSPerM*x); math.Abs(d) > roundS {
			t.Fatalf("element %d: raw %g s != profile + mean + trend x (%g s off)", j, res.RawS[j], d)
		}
	}
	if _, m, s := metrics.Detrend(res.ProfileS, f.x); math.Abs(m) > roundS || math.Abs(s*halfArray) > roundS {
		t.Errorf("profile keeps a mean (%g s) or trend (%g s across half the array)", m, s*halfArray)
	}
	// The start's constant and slope do not leak into the focusing errors:
	// the profile stays within the screen-free noise floor (TestScreenFree).
	if res.RMSS > maxFloorS {
		t.Errorf("profile rms %.2f ns, want <= %.1f ns", res.RMSS*1e9, maxFloorS*1e9)
	}
}

// Two patches, one in speckle and one in echo-free noise below it: the
// noise patch is rejected (its echoes are no more coherent than noise), said
// so in a note, and left out of the disagreement; its small coherence weight
// leaves the joint profile as good as from the speckle patch alone.
func TestNoisePatch(t *testing.T) {
	t.Parallel()
	f := simulate(t, saSpeckle)
	speckle := aberration.Patch{X0: -12e-3, X1: 12e-3, Z0: 18e-3, Z1: 30e-3}
	// well below the speckle (which ends at 32 mm): just below it, the
	// edge waves of the synthetic-aperture point spread of the deepest
	// scatterers still carry some coherent energy (a coherent gain of about
	// 2 at 33.5-37.5 mm); at the end of the record (34 mm deep plus the
	// slant of the aperture, so only pairs of nearby elements reach it)
	noise := aberration.Patch{X0: -12e-3, X1: 12e-3, Z0: 38e-3, Z1: 42e-3}
	both, err := aberration.Estimate(f.a, f.ch, aberration.Config{Model: f.model(), Patches: []aberration.Patch{speckle, noise}})
	if err != nil {
		t.Fatal(err)
	}
	alone, err := aberration.Estimate(f.a, f.ch, aberration.Config{Model: f.model(), Patches: []aberration.Patch{speckle}})
	if err != nil {
		t.Fatal(err)
	}
	eb, rb := score(f, both.ProfileS)
	ea, ra := score(f, alone.ProfileS)
	t.Logf("with the noise patch: error %.1f %%, correlation %.4f, disagreement %.2f, notes %q", 100*eb, rb, both.Disagreement, both.Notes)
	t.Logf("speckle patch alone: error %.1f %%, correlation %.4f", 100*ea, ra)
	for _, p := range both.Patches {
		t.Logf("patch %v: coherent gain %.2f, rejected %v, disagreement %.1f ns", p.Patch, p.CoherentGain, p.Rejected, p.DisagreementS*1e9)
	}
	if len(both.Patches) != 2 || both.Patches[0].Rejected || !both.Patches[1].Rejected {
		t.Fatal("want the noise patch (only) rejected")
	}
	if !slices.ContainsFunc(both.Notes, func(n string) bool { return strings.Contains(n, "coherent than noise") }) {
		t.Errorf("no note on the noise patch: %q", both.Notes)
	}
	if !both.Isoplanatic {
		t.Errorf("the one patch left cannot disagree with itself, disagreement %.2f", both.Disagreement)
	}
	if eb > maxErrSpeckle || !(rb >= minCorrSpeckle) {
		t.Errorf("with the noise patch: error %.1f %%, correlation %.4f: the noise spoiled the profile", 100*eb, rb)
	}
}

// tiny is a fast acquisition for input checks: 16 elements, one plane wave,
// one scatterer.
func tiny(t *testing.T) (*acq.Acquisition, *recon.Channels) {
	t.Helper()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	p.Count = 16
	a, err := sim.Simulate(&sim.Config{Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, c1540), AssumedSpeedMPS: c1540,
		SamplingRateHz: 20e6, NumSamples: 600, Medium: sim.Homogeneous(c1540), Scatterers: []sim.Scatterer{{X: 0, Z: 10e-3, Amp: 1}}})
	if err != nil {
		t.Fatal(err)
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		t.Fatal(err)
	}
	return a, ch
}

func TestBadInput(t *testing.T) {
	t.Parallel()
	a, ch := tiny(t)
	els := a.Probe.Elements()
	model := recon.NewHomogeneous(c1540, els)
	other := recon.NewHomogeneous(c1540, els[:8])
	patch := aberration.Patch{X0: -2e-3, X1: 2e-3, Z0: 8e-3, Z1: 12e-3}
	for _, tc := range []struct {
		name string
		cfg  aberration.Config
		want string
	}{
		{"nil model", aberration.Config{}, "delay model is required"},
		{"model of another array", aberration.Config{Model: other}, "does not match the probe"},
		{"short initial", aberration.Config{Model: model, Initial: make([]float64, 3)}, "initial profile has 3 values for 16 elements"},
		{"NaN initial", aberration.Config{Model: model, Initial: append(make([]float64, 15), math.NaN())}, "initial profile: element 15"},
		{"inverted patch", aberration.Config{Model: model, Patches: []aberration.Patch{{X0: 2e-3, X1: -2e-3, Z0: 8e-3, Z1: 12e-3}}}, "want finite x1 > x0"},
		{"patch above the array", aberration.Config{Model: model, Patches: []aberration.Patch{{X0: -2e-3, X1: 2e-3, Z0: -1e-3, Z1: 12e-3}}}, "z1 > z0 > 0"},
		{"infinite patch", aberration.Config{Model: model, Patches: []aberration.Patch{{X0: -2e-3, X1: math.Inf(1), Z0: 8e-3, Z1: 12e-3}}}, "want finite"},
		{"patch too fine", aberration.Config{Model: model, Patches: []aberration.Patch{patch}, PixelM: 1e-6}, "pixels at"},
		{"negative pixel", aberration.Config{Model: model, PixelM: -1}, "pixel spacing must be positive"},
		{"negative pixel work", aberration.Config{Model: model, PixelWork: -1}, "pixel work must be positive"},
		{"NaN pixel work", aberration.Config{Model: model, PixelWork: math.NaN()}, "pixel work must be positive"},
		{"unknown method", aberration.Config{Model: model, Method: aberration.Method(9)}, "unknown method 9"},
		{"max lag", aberration.Config{Model: model, MaxLag: 16}, "max lag 16 outside 1..15"},
		{"iterations", aberration.Config{Model: model, Iterations: 101}, "iterations must be between 1 and 100"},
		{"even sub-aperture", aberration.Config{Model: model, SubAperture: 2}, "sub-aperture 2 elements: want an odd number from 1 to 4"},
		{"sub-aperture too wide", aberration.Config{Model: model, SubAperture: 5}, "sub-aperture 5 elements"},
		{"negative sub-aperture", aberration.Config{Model: model, SubAperture: -1}, "sub-aperture -1 elements"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			res, err := aberration.Estimate(a, ch, tc.cfg)
			if err == nil || res != nil {
				t.Fatalf("got result %v, error %v; want an error", res != nil, err)
			}
			if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "aberration: ") {
				t.Errorf("error %q, want it to start with \"aberration: \" and contain %q", err, tc.want)
			}
		})
	}
}

func TestParseMethod(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		in   string
		want aberration.Method
	}{
		{"neighbour", aberration.Neighbour}, {"neighbor", aberration.Neighbour}, {"pairs", aberration.Pairs}, {"beamsum", aberration.Beamsum},
	} {
		m, err := aberration.ParseMethod(tc.in)
		if err != nil || m != tc.want {
			t.Errorf("ParseMethod(%q) = %v, %v; want %v", tc.in, m, err, tc.want)
		}
		if m, _ := aberration.ParseMethod(m.String()); m != tc.want {
			t.Errorf("%v does not round-trip through String", tc.want)
		}
	}
	if _, err := aberration.ParseMethod("Pairs"); err == nil {
		t.Error("ParseMethod(\"Pairs\") accepted")
	}
}

// detrended returns the true screen without its mean and trend.
func detrended(f *fixture) []float64 {
	t, _, _ := metrics.Detrend(f.screen, f.x)
	return t
}

// TestSubAperturePlaneWaves checks the mechanism behind the sub-aperture
// sums on 11 compounded plane waves: the many-pairs method on single
// elements, whose neighbour correlations the grating-lobe clutter sets,
// misses the speckle target (it refused its first step here), while the
// default (5 elements at this depth, subaperture.go) meets it (TestSpeckle).
func TestSubAperturePlaneWaves(t *testing.T) {
	t.Parallel()
	f := simulate(t, pwSpeckle)
	res := estimate(t, f, aberration.Pairs)
	if res.SubAperture != 5 {
		t.Errorf("default sub-aperture %d elements, want 5", res.SubAperture)
	}
	single, err := aberration.Estimate(f.a, f.ch, aberration.Config{Model: f.model(), Method: aberration.Pairs, SubAperture: 1})
	if err != nil {
		t.Fatal(err)
	}
	e1, r1 := score(f, single.ProfileS)
	e5, r5 := score(f, res.ProfileS)
	t.Logf("single elements: error %.1f %%, correlation %.4f, lag-one coherence %.3f, notes %q; 5-element sub-apertures: %.1f %%, %.4f",
		100*e1, r1, single.Before.LagOneCoherence, single.Notes, 100*e5, r5)
	if e1 <= maxErrSpeckle && r1 >= minCorrSpeckle {
		t.Errorf("single elements met the target (%.1f %%, %.4f): the sub-aperture is not what makes it work here", 100*e1, r1)
	}
}
