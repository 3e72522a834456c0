package aberration_test

import (
	"fmt"
	"math"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"

	"celerity/aberration"
	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/metrics"
	"celerity/recon"
	"celerity/sim"
)

// Shared fixtures: each simulated acquisition is made once per test binary
// and shared by every test (and the validation table) that asks for it.

// c1540 is the medium's speed and the speed the estimator assumes: the tests
// isolate the profile from the bulk speed.
const c1540 = 1540.0

// caseSpec describes a simulated acquisition in the units of a scenario file.
type caseSpec struct {
	Seed     int
	Transmit string  // scenario transmit block, e.g. "synthetic_aperture: {}"
	RMSNS    float64 // screen rms, ns; 0 for no screen
	CorrMM   float64 // screen correlation length (FWHM), mm
	Wire     bool    // a bright wire at (0, 24) mm
}

const (
	synthetic = "synthetic_aperture: {}"
	// 11 plane waves evenly over +/-8 degrees: -8, -6.4, ..., 8.
	planeWaves = "plane_waves: {count: 11, max_angle_deg: 8}"
)

// wireX, wireZ place the wire in the middle of the speckle region.
const wireX, wireZ = 0.0, 24e-3

// yaml returns the scenario: a 128-element linear array (linear-128: 5 MHz,
// 0.3 mm pitch), a homogeneous 1540 m/s medium, speckle over 30 x 16 mm at
// 16-32 mm depth (10 scatterers per resolution cell: fully developed), an
// optional wire of amplitude 100 (speckle scatterers have unit rms), a
// drawn phase screen, and 30 dB channel SNR.
func (c caseSpec) yaml() string {
	var b strings.Builder
	fmt.Fprintf(&b, "format: celerity.scenario/1\nseed: %d\nprobe: {preset: linear-128}\ndepth_mm: 34\n", c.Seed)
	fmt.Fprintf(&b, "transmit:\n  %s\nmedium: {speed_mps: %g}\n", c.Transmit, c1540)
	if c.RMSNS > 0 {
		fmt.Fprintf(&b, "screen: {rms_ns: %g, correlation_length_mm: %g}\n", c.RMSNS, c.CorrMM)
	}
	b.WriteString("phantom:\n  speckle: {region_mm: [-15, 15, 16, 32], density: 10}\n")
	if c.Wire {
		fmt.Fprintf(&b, "  targets: {positions_mm: [[%g, %g]], amplitude: 100}\n", wireX*1e3, wireZ*1e3)
	}
	b.WriteString("noise: {snr_db: 30}\n")
	return b.String()
}

func (c caseSpec) String() string {
	tx := "11 plane waves"
	if c.Transmit == synthetic {
		tx = "synthetic aperture"
	}
	target := "speckle"
	if c.Wire {
		target = "wire"
	}
	return fmt.Sprintf("%s, %s, %g ns / %g mm, seed %d", tx, target, c.RMSNS, c.CorrMM, c.Seed)
}

// fixture is a simulated acquisition with its truth.
type fixture struct {
	spec  caseSpec
	a     *acq.Acquisition
	ch    *recon.Channels
	truth *acq.Truth
	x     []float64 // element positions along the array, m
	// screen is the true profile (zeros without a screen).
	screen []float64
}

// model returns the bulk delay model: the true speed.
func (f *fixture) model() recon.DelayModel { return recon.NewHomogeneous(c1540, f.a.Probe.Elements()) }

var (
	fixMu    sync.Mutex
	fixtures = map[caseSpec]*fixtureOnce{}
)

type fixtureOnce struct {
	once sync.Once
	f    *fixture
	err  error
}

// simulate returns the shared fixture for c, simulating it on first use.
func simulate(tb testing.TB, c caseSpec) *fixture {
	tb.Helper()
	fixMu.Lock()
	fo := fixtures[c]
	if fo == nil {
		fo = &fixtureOnce{}
		fixtures[c] = fo
	}
	fixMu.Unlock()
	fo.once.Do(func() { fo.f, fo.err = build(c) })
	if fo.err != nil {
		tb.Fatalf("%v: %v", c, fo.err)
	}
	return fo.f
}

func build(c caseSpec) (*fixture, error) {
	sc, err := sim.ParseScenario("case.yaml", []byte(c.yaml()))
	if err != nil {
		return nil, err
	}
	cfg, truth, err := sc.Build()
	if err != nil {
		return nil, err
	}
	a, err := sim.Simulate(cfg)
	if err != nil {
		return nil, err
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		return nil, err
	}
	f := &fixture{spec: c, a: a, ch: ch, truth: truth}
	for _, e := range a.Probe.Elements() {
		f.x = append(f.x, e.X)
	}
	f.screen = make([]float64, len(f.x))
	if truth.Screen != nil {
		copy(f.screen, truth.Screen.DelaysS)
	}
	return f, nil
}

var (
	estMu     sync.Mutex
	estimates = map[estKey]*estOnce{}
)

type estKey struct {
	c caseSpec
	m aberration.Method
}

type estOnce struct {
	once sync.Once
	res  *aberration.Result
	err  error
}

// estimate returns the shared default-configuration estimate of fixture f
// with method m, computed on first use.
func estimate(tb testing.TB, f *fixture, m aberration.Method) *aberration.Result {
	tb.Helper()
	k := estKey{f.spec, m}
	estMu.Lock()
	eo := estimates[k]
	if eo == nil {
		eo = &estOnce{}
		estimates[k] = eo
	}
	estMu.Unlock()
	eo.once.Do(func() {
		eo.res, eo.err = aberration.Estimate(f.a, f.ch, aberration.Config{Model: f.model(), Method: m})
	})
	if eo.err != nil {
		tb.Fatalf("%v, %v: %v", f.spec, m, eo.err)
	}
	return eo.res
}

// score compares an estimate with the true screen after removing the mean
// and the linear trend of both (metrics.ProfileError): rms error as a
// fraction of the true profile's rms (itself detrended), and the
// correlation.
func score(f *fixture, p []float64) (relErr, corr float64) {
	e, r := metrics.ProfileError(p, f.screen, f.x)
	t, _, _ := metrics.Detrend(f.screen, f.x)
	return e / rmsOf(t), r
}

func rmsOf(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s / float64(len(v)))
}

// removeQuadratic returns p minus its least-squares fit by a + b x + c x^2.
func removeQuadratic(p, x []float64) []float64 {
	A := mat.NewDense(len(p), 3, nil)
	for i, xi := range x {
		A.Set(i, 0, 1)
		A.Set(i, 1, xi*1e3) // mm: keeps the normal equations well scaled
		A.Set(i, 2, xi*xi*1e6)
	}
	var c mat.VecDense
	if err := c.SolveVec(A, mat.NewVecDense(len(p), append([]float64(nil), p...))); err != nil {
		panic(err)
	}
	out := make([]float64, len(p))
	for i, xi := range x {
		out[i] = p[i] - c.AtVec(0) - c.AtVec(1)*xi*1e3 - c.AtVec(2)*xi*xi*1e6
	}
	return out
}

// wireImage forms a B-mode envelope around the wire (x -3..3 mm, z 21..27
// mm at 0.05 mm) with delay model m: receive F-number 1.5, boxcar aperture
// (the synthetic transmit aperture follows the same rule), so that the
// lateral -6 dB width is about 0.886 lambda F# = 0.41 mm (CHECKS.md, two-way
// focused rectangular aperture; from memory), eight pixels across.
func wireImage(tb testing.TB, f *fixture, m recon.DelayModel) *metrics.Field {
	tb.Helper()
	g, err := recon.NewRect(wireX-3e-3, wireX+3e-3, 0.05e-3, wireZ-3e-3, wireZ+3e-3, 0.05e-3)
	if err != nil {
		tb.Fatal(err)
	}
	bf, err := recon.NewBeamformer(f.a, &g, m, recon.Config{FNumber: 1.5, Window: dsp.Window{Kind: dsp.Boxcar}})
	if err != nil {
		tb.Fatal(err)
	}
	img, err := bf.Form(nil, f.ch)
	if err != nil {
		tb.Fatal(err)
	}
	return &metrics.Field{X: g.X, Z: g.Z, V: recon.Envelope(img)}
}
