package speed

import (
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"testing"

	"celerity/acq"
	"celerity/recon"
	"celerity/sim"
)

// speckleSim describes a simulated acquisition of diffuse speckle (and
// optionally wires) with the linear-128 preset, recorded at 20 MHz.
type speckleSim struct {
	medium  sim.Medium
	events  []acq.Event
	speckle sim.Region
	// density is in scatterers per sim.ResolutionCell; 0 means 10, the
	// simulator's default (nearly fully developed speckle).
	density float64
	depthM  float64 // the record holds the echo of this depth on every element
	snrDB   float64 // channel SNR; 0 means no noise
	screen  []float64
	wires   [][2]float64
	seed    uint64
}

// run simulates s. The firing delays of s.events are computed at 1540 m/s.
func (s speckleSim) run() (*acq.Acquisition, *recon.Channels, error) {
	p, err := sim.Preset("linear-128")
	if err != nil {
		return nil, nil, err
	}
	density := s.density
	if density == 0 {
		density = sim.DefaultDensity
	}
	pulse := sim.Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}
	lat, ax := sim.ResolutionCell(pulse, 1540)
	sc, err := sim.Speckle(rand.New(rand.NewPCG(s.seed, 0x737065636b)), s.speckle, density, lat*ax)
	if err != nil {
		return nil, nil, err
	}
	for _, w := range s.wires {
		sc = append(sc, sim.Scatterer{X: w[0], Z: w[1], Amp: sim.DefaultTargetAmp})
	}
	maxDelay := 0.0
	for _, ev := range s.events {
		for _, d := range ev.Delays {
			maxDelay = math.Max(maxDelay, d)
		}
	}
	const fs = 20e6
	tEnd := (s.depthM+math.Hypot(s.depthM, p.Aperture()))/s.medium.MinSpeed() + maxDelay + 2e-6
	cfg := &sim.Config{Probe: p, Events: s.events, AssumedSpeedMPS: 1540, SamplingRateHz: fs,
		NumSamples: int(math.Ceil(tEnd * fs)), Medium: s.medium, Screen: s.screen, Scatterers: sc, Seed: s.seed}
	if s.snrDB != 0 {
		snr := s.snrDB
		cfg.NoiseSNRDB = &snr
	}
	a, err := sim.Simulate(cfg)
	if err != nil {
		return nil, nil, err
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		return nil, nil, err
	}
	return a, ch, nil
}

// simOnce builds one simulated case on first use and shares it between the
// tests and subtests that need it.
type simOnce struct {
	once sync.Once
	a    *acq.Acquisition
	ch   *recon.Channels
	err  error
}

func (c *simOnce) get(t testing.TB, spec func() speckleSim) (*acq.Acquisition, *recon.Channels) {
	t.Helper()
	c.once.Do(func() { c.a, c.ch, c.err = spec().run() })
	if c.err != nil {
		t.Fatal(c.err)
	}
	return c.a, c.ch
}

// The homogeneous cases: fully developed speckle 20 x 14 mm centred at
// 22 mm depth, 21 plane waves over +/-8 degrees (delays at 1540 m/s), 20 dB
// channel SNR. The simulator synthesises plane waves from its single-element
// records, so 21 angles cost no more than 5; the tests take the 11-angle
// (every other), 5-angle (-8, -4, 0, 4, 8) and single (0 degree) sequences
// as event subsets of one record.
var (
	homSims = map[float64]*simOnce{1460: {}, 1580: {}}
	// homRegion is where the criterion is evaluated, at 1540 m/s: its echoes
	// come from 16.1 to 25.6 mm at 1460 m/s and 17.4 to 27.7 mm at 1580 m/s,
	// at least a millimetre inside the speckle on every side.
	homRegion = Region{X0: -6e-3, X1: 6e-3, Z0: 17e-3, Z1: 27e-3}
	hom11     = []int{0, 2, 4, 6, 8, 10, 12, 14, 16, 18, 20}
	hom5      = []int{0, 5, 10, 15, 20}
	hom1      = []int{10}
)

func homCase(t testing.TB, c float64) (*acq.Acquisition, *recon.Channels) {
	t.Helper()
	h, ok := homSims[c]
	if !ok {
		t.Fatalf("no homogeneous case at %g m/s", c)
	}
	return h.get(t, func() speckleSim {
		p, _ := sim.Preset("linear-128")
		return speckleSim{medium: sim.Homogeneous(c), events: acq.PlaneWaveSequence(&p, acq.SpreadAngles(21, 8), 1540),
			speckle: sim.Region{X0: -10e-3, X1: 10e-3, Z0: 15e-3, Z1: 29e-3}, depthM: 30e-3, snrDB: 20, seed: uint64(c)}
	})
}

// Accuracy targets of the issue (hard requirements).
const (
	maxErrCompound11 = 3.0  // m/s, 11 compounded plane waves over +/-8 degrees
	maxErrCompound5  = 5.0  // m/s, 5 compounded plane waves over +/-8 degrees
	maxErrSingleHigh = 10.0 // m/s, largest error allowed with confidence "high" on one plane wave
)

func TestSweepCompounded(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name   string
		truth  float64
		events []int
		maxErr float64
		strict bool // also require the interval to cover the truth and confidence high
	}{
		{"1460/11 angles", 1460, hom11, maxErrCompound11, true},
		{"1580/11 angles", 1580, hom11, maxErrCompound11, true},
		{"1580/5 angles", 1580, hom5, maxErrCompound5, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			a, ch := homCase(t, tc.truth)
			r := homRegion
			res, err := Sweep(a, ch, SweepConfig{Region: &r, Events: tc.events, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			e := res.SpeedMPS - tc.truth
			t.Logf("estimate %.2f m/s (error %+.2f), 95 %% interval %.1f..%.1f, std err %.2f, confidence %s, %d tiles, notes %q",
				res.SpeedMPS, e, res.CI95MPS[0], res.CI95MPS[1], res.StdErrMPS, res.Confidence, res.Tiles, res.Notes)
			if math.Abs(e) > tc.maxErr {
				t.Errorf("error %+.2f m/s, want at most %g (issue)", e, tc.maxErr)
			}
			if !tc.strict {
				return
			}
			if !(res.CI95MPS[0] <= tc.truth && tc.truth <= res.CI95MPS[1]) {
				t.Errorf("95 %% interval %.1f..%.1f does not cover the truth %g", res.CI95MPS[0], res.CI95MPS[1], tc.truth)
			}
			if res.Confidence != High {
				t.Errorf("confidence %q, want %q (notes %q)", res.Confidence, High, res.Notes)
			}
			if res.Criterion != TransmitCoherence.String() || res.Method != "sweep" || len(res.Curve) < 20 {
				t.Errorf("criterion %q, method %q, %d curve points", res.Criterion, res.Method, len(res.Curve))
			}
		})
	}
}

// TestSweepSinglePlaneWave: receive-only criteria on diffuse echoes of one
// plane wave carry little information (van Cittert-Zernike: the coherence
// length across the receive aperture is set by the width of the insonified
// region, here the whole array). The issue requires the estimate to be
// within 10 m/s or flagged low confidence, never high confidence and wrong.
func TestSweepSinglePlaneWave(t *testing.T) {
	t.Parallel()
	for _, truth := range []float64{1460, 1580} {
		t.Run("", func(t *testing.T) {
			t.Parallel()
			a, ch := homCase(t, truth)
			r := homRegion
			res, err := Sweep(a, ch, SweepConfig{Region: &r, Events: hom1, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			e := res.SpeedMPS - truth
			t.Logf("truth %g: estimate %.1f (error %+.1f), interval %.1f..%.1f, confidence %s", truth, res.SpeedMPS, e,
				res.CI95MPS[0], res.CI95MPS[1], res.Confidence)
			if res.Confidence == High && math.Abs(e) > maxErrSingleHigh {
				t.Errorf("confidence high with error %+.1f m/s (issue: never above %g with high confidence)", e, maxErrSingleHigh)
			}
			if !hasNote(res.Notes, "one unfocused transmit") {
				t.Errorf("no note about the single unfocused transmit: %q", res.Notes)
			}
		})
	}
}

// TestDefaultCriterionFor: the transmit coherence where acq.CompoundedWaves
// holds (its own test covers the rule), the coherence factor otherwise.
func TestDefaultCriterionFor(t *testing.T) {
	t.Parallel()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	pw := &acq.Acquisition{Probe: p, AssumedSpeedMPS: 1540, Events: acq.PlaneWaveSequence(&p, acq.SpreadAngles(11, 8), 1540)}
	sa := &acq.Acquisition{Probe: p, AssumedSpeedMPS: 1540, Events: acq.SyntheticApertureSequence(&p)}
	if c := DefaultCriterionFor(pw, nil); c != TransmitCoherence {
		t.Errorf("11 plane waves: %s, want %s", c, TransmitCoherence)
	}
	if c := DefaultCriterionFor(pw, []int{5}); c != CoherenceFactor {
		t.Errorf("one plane wave: %s, want %s", c, CoherenceFactor)
	}
	if c := DefaultCriterionFor(sa, EvenEvents(128, MaxEvents)); c != CoherenceFactor {
		t.Errorf("synthetic aperture: %s, want %s", c, CoherenceFactor)
	}
}

// TestSweepTransmitCoherenceNearField: 11 plane waves over +/-8 degrees in
// the near field (a region at 5-10 mm, where the aperture at F/1 spans 17-33
// elements). The receive-element coherence factor reads such windows
// 7-15 m/s high (docs/validation.md); the default criterion on plane waves,
// the coherence across the events' images, must stay within
// maxErrNearField.
func TestSweepTransmitCoherenceNearField(t *testing.T) {
	t.Parallel()
	// maxErrNearField: the 5 m/s for 5 compounded angles; the 3 m/s
	// for 11 angles is set for regions beyond the near field.
	const truth, maxErrNearField = 1490.0, 5.0
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	a, ch, err := speckleSim{medium: sim.Homogeneous(truth), events: acq.PlaneWaveSequence(&p, acq.SpreadAngles(11, 8), 1540),
		speckle: sim.Region{X0: -8e-3, X1: 8e-3, Z0: 3e-3, Z1: 13e-3}, depthM: 14e-3, snrDB: 20, seed: 11}.run()
	if err != nil {
		t.Fatal(err)
	}
	r := Region{X0: -5e-3, X1: 5e-3, Z0: 5e-3, Z1: 10e-3}
	res, err := Sweep(a, ch, SweepConfig{Region: &r, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	e := res.SpeedMPS - truth
	t.Logf("%s: estimate %.2f m/s (error %+.2f), interval %.1f..%.1f, %s", res.Criterion, res.SpeedMPS, e, res.CI95MPS[0], res.CI95MPS[1], res.Confidence)
	if res.Criterion != TransmitCoherence.String() {
		t.Errorf("criterion %s, want %s", res.Criterion, TransmitCoherence)
	}
	if math.Abs(e) > maxErrNearField {
		t.Errorf("error %+.2f m/s, want at most %g", e, maxErrNearField)
	}
}

// TestSweepRangeExcludesTruth: when the search range stops short of the true
// speed the criterion peaks at the edge; the estimate must say so.
func TestSweepRangeExcludesTruth(t *testing.T) {
	t.Parallel()
	cases := []struct {
		truth, lo, hi float64
	}{
		{1580, 1400, 1550},
		{1460, 1500, 1650},
	}
	for _, tc := range cases {
		t.Run("", func(t *testing.T) {
			t.Parallel()
			a, ch := homCase(t, tc.truth)
			r := homRegion
			res, err := Sweep(a, ch, SweepConfig{Region: &r, Events: hom11, MinMPS: tc.lo, MaxMPS: tc.hi, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("truth %g, range %g..%g: estimate %.1f, confidence %s, notes %q", tc.truth, tc.lo, tc.hi, res.SpeedMPS, res.Confidence, res.Notes)
			if res.Confidence != Low {
				t.Errorf("confidence %q, want low", res.Confidence)
			}
			if !hasNote(res.Notes, "edge of the search range") {
				t.Errorf("no note about the edge of the range: %q", res.Notes)
			}
			if res.SpeedMPS < tc.lo || res.SpeedMPS > tc.hi {
				t.Errorf("estimate %.1f outside the search range", res.SpeedMPS)
			}
		})
	}
}

func hasNote(notes []string, s string) bool {
	for _, n := range notes {
		if strings.Contains(n, s) {
			return true
		}
	}
	return false
}

// tinyAcq is a small, fast acquisition (16 elements, one plane wave, one
// point) for tests of configuration errors.
var tinySim simOnce

func tinyAcq(t testing.TB) (*acq.Acquisition, *recon.Channels) {
	t.Helper()
	tinySim.once.Do(func() {
		p, err := sim.Preset("linear-128")
		if err != nil {
			tinySim.err = err
			return
		}
		p.Count = 16
		tinySim.a, tinySim.err = sim.Simulate(&sim.Config{Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540),
			AssumedSpeedMPS: 1540, SamplingRateHz: 20e6, NumSamples: 400, Medium: sim.Homogeneous(1540),
			Scatterers: []sim.Scatterer{{X: 0, Z: 5e-3, Amp: 1}}})
		if tinySim.err == nil {
			tinySim.ch, tinySim.err = recon.Prepare(tinySim.a)
		}
	})
	if tinySim.err != nil {
		t.Fatal(tinySim.err)
	}
	return tinySim.a, tinySim.ch
}

func TestSweepConfigErrors(t *testing.T) {
	t.Parallel()
	a, ch := tinyAcq(t)
	ok := Region{X0: -1e-3, X1: 1e-3, Z0: 3e-3, Z1: 7e-3}
	region := func(r Region) *Region { return &r }
	cases := []struct {
		name string
		cfg  SweepConfig
		want string
	}{
		{"region upside down", SweepConfig{Region: region(Region{X0: -1e-3, X1: 1e-3, Z0: 7e-3, Z1: 3e-3})}, "region"},
		{"region left of right", SweepConfig{Region: region(Region{X0: 1e-3, X1: -1e-3, Z0: 3e-3, Z1: 7e-3})}, "region"},
		{"region above the array", SweepConfig{Region: region(Region{X0: -1e-3, X1: 1e-3, Z0: -1e-3, Z1: 7e-3})}, "region"},
		{"region at the face", SweepConfig{Region: region(Region{X0: -1e-3, X1: 1e-3, Z0: 0, Z1: 7e-3})}, "region"},
		{"region NaN", SweepConfig{Region: region(Region{X0: math.NaN(), X1: 1e-3, Z0: 3e-3, Z1: 7e-3})}, "region"},
		{"region infinite", SweepConfig{Region: region(Region{X0: -1e-3, X1: math.Inf(1), Z0: 3e-3, Z1: 7e-3})}, "region"},
		{"range reversed", SweepConfig{Region: &ok, MinMPS: 1600, MaxMPS: 1500}, "speed range"},
		{"range too low", SweepConfig{Region: &ok, MinMPS: 100, MaxMPS: 1500}, "speed range"},
		{"negative step", SweepConfig{Region: &ok, CoarseStepMPS: -10}, "steps"},
		{"fine above coarse", SweepConfig{Region: &ok, CoarseStepMPS: 5, FineStepMPS: 10}, "steps"},
		{"too many speeds", SweepConfig{Region: &ok, CoarseStepMPS: 0.01, FineStepMPS: 0.01}, "too many"},
		{"unknown criterion", SweepConfig{Region: &ok, Criterion: Criterion(42)}, "criterion"},
		{"event out of range", SweepConfig{Region: &ok, Events: []int{3}}, "event"},
		{"transmit coherence of one event", SweepConfig{Region: &ok, Criterion: TransmitCoherence}, "three or more events"},
		// far below the end of the record: nothing to focus on
		{"no echoes", SweepConfig{Region: region(Region{X0: -1e-3, X1: 1e-3, Z0: 0.2, Z1: 0.21})}, "undefined"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			res, err := Sweep(a, ch, tc.cfg)
			if err == nil {
				t.Fatalf("no error; result %+v", res)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %q, want it to mention %q", err, tc.want)
			}
		})
	}
}

func TestRefinePeak(t *testing.T) {
	t.Parallel()
	// A parabola sampled on a 2 m/s grid: the least-squares vertex is exact
	// (closed form: y = -(c - c0)^2 has its vertex at c0).
	grid := func(lo, hi, step float64) []float64 {
		var out []float64
		for c := lo; c <= hi+1e-9; c += step {
			out = append(out, c)
		}
		return out
	}
	sp := grid(1500, 1560, 2)
	para := func(c0 float64) []float64 {
		v := make([]float64, len(sp))
		for i, c := range sp {
			v[i] = 1 - (c-c0)*(c-c0)*1e-4
		}
		return v
	}
	for _, c0 := range []float64{1523.37, 1531, 1540.9} {
		got, edge := refinePeak(sp, para(c0), 10)
		if math.Abs(got-c0) > 1e-6 || edge {
			t.Errorf("vertex %.4f (edge %v), want %.4f", got, edge, c0)
		}
	}
	// A maximum at the end of the range is reported as an edge.
	if _, edge := refinePeak(sp, para(1580), 10); !edge {
		t.Error("a maximum beyond the range: edge not reported")
	}
	// A lone spike in a convex bowl: the fit is not concave, so the best
	// sample itself is returned.
	v := make([]float64, len(sp))
	for i, c := range sp {
		if d := c - 1520; math.Abs(d) < 15 {
			v[i] = 0.04 * d * d
		}
	}
	v[10] = 10 // 1520 m/s
	if got, _ := refinePeak(sp, v, 10); got != 1520 {
		t.Errorf("non-concave fit: %.3f, want the best sample 1520", got)
	}
	// Undefined everywhere.
	nan := []float64{math.NaN(), math.NaN(), math.NaN()}
	if got, edge := refinePeak([]float64{1, 2, 3}, nan, 10); !math.IsNaN(got) || !edge {
		t.Errorf("all NaN: %v, %v", got, edge)
	}
}

func TestSecondPeak(t *testing.T) {
	t.Parallel()
	sp := make([]float64, 26)
	one := make([]float64, len(sp))
	two := make([]float64, len(sp))
	for i := range sp {
		sp[i] = 1400 + 10*float64(i)
		g := func(c0, w float64) float64 { return math.Exp(-(sp[i] - c0) * (sp[i] - c0) / (2 * w * w)) }
		one[i] = g(1520, 20)
		two[i] = g(1480, 15) + 0.9*g(1580, 15)
	}
	if k := secondPeak(sp, one, argmaxFinite(one), 10); k != -1 {
		t.Errorf("one peak: second peak at %g", sp[k])
	}
	if k := secondPeak(sp, two, argmaxFinite(two), 10); k < 0 || sp[k] != 1580 {
		t.Errorf("two peaks: second peak index %d, want 1580 m/s", k)
	}
}

func TestIntervalFrom(t *testing.T) {
	t.Parallel()
	// Bootstrap peaks spread uniformly over est +/- 5: the 2.5 and 97.5 %
	// quantiles are est -/+ 4.75 (linear interpolation of the sorted values).
	const est = 1500.0
	var peaks []float64
	for i := range 101 {
		peaks = append(peaks, est-5+0.1*float64(i))
	}
	se, ci, sys := intervalFrom(peaks, est, -1)
	if math.Abs(ci[0]-(est-4.75)) > 1e-9 || math.Abs(ci[1]-(est+4.75)) > 1e-9 || sys != 0 {
		t.Errorf("no systematic part: interval %v, sys %g", ci, sys)
	}
	// sample standard deviation of 101 points 0.1 apart:
	// 0.1 sqrt(sum_k (k - 50)^2 / 100) = 0.1 sqrt(101 * 102 / 12) (closed form)
	if want := math.Sqrt(101*102.0/12) * 0.1; math.Abs(se-want) > 1e-9 {
		t.Errorf("standard error %.6f, want %.6f", se, want)
	}
	// A rectangular systematic component of half-width f est has standard
	// uncertainty f est / sqrt(3) (GUM type B) and adds in quadrature to
	// each side: half-width sqrt(4.75^2 + (1.96 f est / sqrt(3))^2).
	const f = 0.001
	_, ci, sys = intervalFrom(peaks, est, f)
	s := 1.96 * f * est / math.Sqrt(3)
	if want := math.Hypot(4.75, s); math.Abs(ci[1]-est-want) > 1e-9 || math.Abs(est-ci[0]-want) > 1e-9 {
		t.Errorf("with systematic part: interval %v, want est +/- %.4f", ci, want)
	}
	if math.Abs(sys-f*est/math.Sqrt(3)) > 1e-12 {
		t.Errorf("systematic standard uncertainty %g", sys)
	}
	if se, ci, _ := intervalFrom([]float64{1}, est, f); !math.IsNaN(se) || !math.IsNaN(ci[0]) {
		t.Errorf("one resample: %v %v, want NaN", se, ci)
	}
}
