package speed

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"celerity/acq"
	"celerity/recon"
	"celerity/sim"
)

// What the point-target method achieves here, against the reference level
// of Anderson & Trahey, JASA 104(5), 1998 (CHECKS.md: mean relative error
// under 0.4 %, under 0.1 % in ideal conditions; a level to beat, not a test
// value): on simulated wires at 30 dB SNR the error is a few hundredths of a
// m/s (about 1e-5 relative, under 0.002 %) for a single plane wave, steered
// plane waves and synthetic aperture at 1450 to 1600 m/s, 0.02 m/s on the
// independent reference sample, and about 0.2 m/s (1e-4) when a time offset
// is fitted too. The tests below assert the issue's 3 m/s (0.2 %), and log
// the errors they measure.

// tgtMaxErrMPS is the issue's hard requirement on the speed error.
const tgtMaxErrMPS = 3.0

// tgtFastRegion keeps the detection image small: it spans the simulated
// wires (at 12, 20 and 30 mm) at the initial speed 1540 m/s for true speeds
// from 1450 to 1600 m/s (the image of depth z lies at z 1540 / c).
var tgtFastRegion = &Region{X0: -10e-3, X1: 10e-3, Z0: 8e-3, Z1: 35e-3}

// tgtWires are the simulated wire positions, m.
var tgtWires = [][2]float64{{-5e-3, 12e-3}, {0, 20e-3}, {6e-3, 30e-3}}

// simWires simulates point targets of unit amplitude in a homogeneous medium
// of speed c, recorded at 20 MHz down to depth plus the longest path across
// the aperture, with the firing delays of events (computed at 1540 m/s).
func simWires(t testing.TB, p acq.Probe, events []acq.Event, c float64, targets [][2]float64, snrDB, depth float64, seed uint64) *acq.Acquisition {
	t.Helper()
	maxDelay := 0.0
	for _, ev := range events {
		for _, d := range ev.Delays {
			maxDelay = math.Max(maxDelay, d)
		}
	}
	const fs = 20e6
	tEnd := (depth+math.Hypot(depth, p.Aperture()))/c + maxDelay + 2e-6
	var sc []sim.Scatterer
	for _, q := range targets {
		sc = append(sc, sim.Scatterer{X: q[0], Z: q[1], Amp: 1})
	}
	cfg := &sim.Config{Probe: p, Events: events, AssumedSpeedMPS: 1540, SamplingRateHz: fs,
		NumSamples: int(math.Ceil(tEnd * fs)), Medium: sim.Homogeneous(c), Scatterers: sc, Seed: seed}
	if snrDB > 0 {
		cfg.NoiseSNRDB = &snrDB
	}
	a, err := sim.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return a
}

func mustPrepare(t testing.TB, a *acq.Acquisition) *recon.Channels {
	t.Helper()
	ch, err := recon.Prepare(a)
	if err != nil {
		t.Fatal(err)
	}
	return ch
}

// checkTargets asserts the issue's requirements on a result: speed within
// 3 m/s, the 95 % interval covering the truth, confidence high, every true
// target found within a quarter wavelength (at the true speed). It logs the
// measured errors.
func checkTargets(t *testing.T, res *TargetResult, truth float64, wires [][2]float64, f0 float64) {
	t.Helper()
	err := res.SpeedMPS - truth
	t.Logf("speed %.3f m/s (error %+.3f m/s, %.4f %%), 95 %% interval %.3f..%.3f, SE %.4f, systematic %.4f, %s",
		res.SpeedMPS, err, 100*err/truth, res.CI95MPS[0], res.CI95MPS[1], res.StdErrMPS, res.SystematicMPS, res.Confidence)
	for _, f := range res.Targets {
		t.Logf("  target (%.4f, %.4f) mm: %.3f +/- %.4f m/s, %d arrival times, %.3f ns rms", f.XM*1e3, f.ZM*1e3, f.SpeedMPS, f.StdErrMPS, f.Channels, f.RMSResidualNS)
	}
	for _, n := range res.Notes {
		t.Logf("  note: %s", n)
	}
	if res.Method != "targets" || res.Criterion != "arrival-time fit" {
		t.Errorf("method %q, criterion %q", res.Method, res.Criterion)
	}
	if math.Abs(err) > tgtMaxErrMPS {
		t.Errorf("speed %.3f m/s, truth %g: error %.3f m/s exceeds %g", res.SpeedMPS, truth, err, tgtMaxErrMPS)
	}
	if !(res.CI95MPS[0] <= truth && truth <= res.CI95MPS[1]) {
		t.Errorf("95 %% interval %.3f..%.3f m/s misses the truth %g", res.CI95MPS[0], res.CI95MPS[1], truth)
	}
	if res.Confidence != High {
		t.Errorf("confidence %s, want high", res.Confidence)
	}
	posTol := truth / f0 / 4 // a quarter wavelength, the issue's requirement
	for _, w := range wires {
		best := math.Inf(1)
		for _, f := range res.Targets {
			best = math.Min(best, math.Hypot(f.XM-w[0], f.ZM-w[1]))
		}
		if best > posTol {
			t.Errorf("wire at (%g, %g) mm: nearest fit %.4f mm away, want within lambda/4 = %.4f mm", w[0]*1e3, w[1]*1e3, best*1e3, posTol*1e3)
		}
	}
}

// A single 0-degree plane wave on three wires, 128-element linear array,
// 30 dB SNR, at three true speeds; the detection image is always formed at
// 1540 m/s.
func TestTargetsPlaneWave(t *testing.T) {
	t.Parallel()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	for i, c := range []float64{1450, 1540, 1600} {
		t.Run(fmt.Sprint(c), func(t *testing.T) {
			t.Parallel()
			a := simWires(t, p, acq.PlaneWaveSequence(&p, []float64{0}, 1540), c, tgtWires, 30, 35e-3, uint64(10+i))
			cfg := TargetConfig{Region: tgtFastRegion}
			if c == 1540 {
				cfg.Region = nil // the whole field of view, once
			}
			res, err := Targets(a, mustPrepare(t, a), cfg)
			if err != nil {
				t.Fatal(err)
			}
			checkTargets(t, res, c, tgtWires, p.CenterFrequencyHz)
		})
	}
}

// Synthetic aperture and compounded steered plane waves, all fired with
// delays computed at 1540 m/s in media of other speeds: the transmit
// wavefront must be derived from the delays at the fitted speed.
func TestTargetsSequences(t *testing.T) {
	t.Parallel()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	// A sparse synthetic aperture (every fourth element fires) keeps the
	// simulation fast; each event is still a single-element transmit.
	var sparse []acq.Event
	for i, ev := range acq.SyntheticApertureSequence(&p) {
		if i%4 == 0 {
			sparse = append(sparse, ev)
		}
	}
	steered := acq.PlaneWaveSequence(&p, acq.SpreadAngles(5, 10), 1540)
	cases := []struct {
		name   string
		events []acq.Event
		c      float64
	}{
		{"synthetic-aperture-1450", sparse, 1450},
		{"steered-5-1450", steered, 1450},
		{"steered-5-1600", steered, 1600},
	}
	for i, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			a := simWires(t, p, tc.events, tc.c, tgtWires, 30, 35e-3, uint64(20+i))
			res, err := Targets(a, mustPrepare(t, a), TargetConfig{Region: tgtFastRegion})
			if err != nil {
				t.Fatal(err)
			}
			checkTargets(t, res, tc.c, tgtWires, p.CenterFrequencyHz)
		})
	}
}

// The independent reference sample: three wires under steered plane waves
// in a 1450 m/s medium, 64 elements, 35 dB SNR, made outside this project.
// Truth from testdata/samples/wires-steered.truth.yaml.
func TestTargetsReferenceSample(t *testing.T) {
	t.Parallel()
	a, err := acq.Load("../testdata/samples/wires-steered")
	if err != nil {
		t.Fatal(err)
	}
	truth, err := acq.LoadTruthFile("../testdata/samples/wires-steered.truth.yaml")
	if err != nil {
		t.Fatal(err)
	}
	res, err := Targets(a, mustPrepare(t, a), TargetConfig{})
	if err != nil {
		t.Fatal(err)
	}
	checkTargets(t, res, truth.SpeedMPS, truth.TargetsM, a.Probe.CenterFrequencyHz)
}

// Echoes that arrive 200 ns later than the time reference says (the record
// is labelled 200 ns late: a lens or pulse delay the acquisition leaves
// out). Trusting the reference biases the speed; fitting the offset recovers
// it, and the offset itself.
func TestTargetsFitOffset(t *testing.T) {
	t.Parallel()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	const c, shift = 1540.0, 200e-9
	a := simWires(t, p, acq.PlaneWaveSequence(&p, []float64{0}, 1540), c, tgtWires, 30, 35e-3, 30)
	a.StartTimeS += shift
	ch := mustPrepare(t, a)

	biased, err := Targets(a, ch, TargetConfig{Region: tgtFastRegion})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("trusting the time reference: %.3f m/s (error %+.3f m/s)", biased.SpeedMPS, biased.SpeedMPS-c)
	// Derived: late echoes read as a deeper, slower medium. For an on-axis
	// target t0 = 2 z / c and the moveout fixes z c, so c^2 = (z c) / (t0 / 2)
	// and dc / c = -dt / (2 t0): about -200 ns / (2 * 26 us) = -0.4 %, -6 m/s
	// at 20 mm, less deeper. The bias must exceed the 3 m/s requirement.
	if !(biased.SpeedMPS < c-tgtMaxErrMPS) {
		t.Errorf("without the offset fit: %.3f m/s, want biased below %g by more than %g m/s", biased.SpeedMPS, c, tgtMaxErrMPS)
	}

	res, err := Targets(a, ch, TargetConfig{Region: tgtFastRegion, FitOffset: true})
	if err != nil {
		t.Fatal(err)
	}
	checkTargets(t, res, c, tgtWires, p.CenterFrequencyHz)
	// The offset trades off against depth and speed: its error stays within
	// an eighth of a period (25 ns at 5 MHz; up to 21 ns seen at 30 mm over
	// ten noise seeds, a few ns at 12 and 20 mm).
	const offTolNS = 25.0
	for _, f := range res.Targets {
		t.Logf("  offset found at (%.1f, %.1f) mm: %.2f ns (truth %g ns)", f.XM*1e3, f.ZM*1e3, f.OffsetNS, shift*1e9)
		if math.Abs(f.OffsetNS-shift*1e9) > offTolNS {
			t.Errorf("target at (%.1f, %.1f) mm: offset %.2f ns, want %g +/- %g", f.XM*1e3, f.ZM*1e3, f.OffsetNS, shift*1e9, offTolNS)
		}
	}
}

// Speed bounds that exclude the truth: the fits stop at the bound, and the
// result says so with confidence low; bounds far from the truth leave the
// arrival times misfit by more than a quarter period, and no target usable.
func TestTargetsSpeedBound(t *testing.T) {
	t.Parallel()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	a := simWires(t, p, acq.PlaneWaveSequence(&p, []float64{0}, 1540), 1450, tgtWires, 30, 35e-3, 40)
	ch := mustPrepare(t, a)
	res, err := Targets(a, ch, TargetConfig{Region: tgtFastRegion, MinMPS: 1460, MaxMPS: 1700})
	if err != nil {
		t.Fatal(err)
	}
	if res.Confidence != Low || !strings.Contains(strings.Join(res.Notes, "\n"), "speed bound 1460") {
		t.Errorf("bounds 1460..1700 on a 1450 m/s medium: confidence %s, notes %q; want low, citing the bound", res.Confidence, res.Notes)
	}
	_, err = Targets(a, ch, TargetConfig{Region: tgtFastRegion, MinMPS: 1500, MaxMPS: 1700})
	if !errors.Is(err, ErrNoTargets) || !strings.Contains(err.Error(), "speed bound 1500") {
		t.Errorf("bounds 1500..1700 on a 1450 m/s medium: error %v, want ErrNoTargets citing the bound", err)
	}
}

// Pure speckle holds no point target: Targets returns an error wrapping
// ErrNoTargets rather than a made-up estimate.
func TestTargetsSpeckleOnly(t *testing.T) {
	t.Parallel()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	p.Count = 64 // a smaller array keeps the simulation fast
	rng := rand.New(rand.NewPCG(1, 2))
	pulse := sim.Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}
	lat, ax := sim.ResolutionCell(pulse, 1540)
	sc, err := sim.Speckle(rng, sim.Region{X0: -8e-3, X1: 8e-3, Z0: 4e-3, Z1: 24e-3}, sim.DefaultDensity, lat*ax)
	if err != nil {
		t.Fatal(err)
	}
	snr := 30.0
	a, err := sim.Simulate(&sim.Config{Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540), AssumedSpeedMPS: 1540,
		SamplingRateHz: 20e6, NumSamples: 700, Medium: sim.Homogeneous(1540), Scatterers: sc, NoiseSNRDB: &snr, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	res, err := Targets(a, mustPrepare(t, a), TargetConfig{})
	if !errors.Is(err, ErrNoTargets) {
		t.Fatalf("got result %+v, error %v; want ErrNoTargets", res, err)
	}
	t.Log(err)
}

func TestTargetsConfigErrors(t *testing.T) {
	t.Parallel()
	p := acq.NewLinear(16, 0.3e-3, 5e6)
	a := &acq.Acquisition{Probe: p, SamplingRateHz: 20e6, AssumedSpeedMPS: 1540, Kind: acq.RF,
		Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540), NumSamples: 400}
	a.RF = make([]float32, 16*400)
	ch := mustPrepare(t, a)
	short := *ch
	short.NS = 100
	cases := []struct {
		name string
		ch   *recon.Channels
		cfg  TargetConfig
		want string
	}{
		{"bounds", ch, TargetConfig{MinMPS: 1600, MaxMPS: 1500}, "speed bounds"},
		{"initial speed", ch, TargetConfig{InitialSpeedMPS: -1}, "initial speed"},
		{"event", ch, TargetConfig{Events: []int{1}}, "event 1"},
		{"region", ch, TargetConfig{Region: &Region{X0: 1, X1: 0, Z0: 0.01, Z1: 0.02}}, "region"},
		{"targets", ch, TargetConfig{MaxTargets: -1}, "targets"},
		{"channels", &short, TargetConfig{}, "do not match"},
		{"nil channels", nil, TargetConfig{}, "do not match"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Targets(a, tc.ch, tc.cfg)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one mentioning %q", err, tc.want)
			}
			if errors.Is(err, ErrNoTargets) {
				t.Errorf("a configuration error wraps ErrNoTargets: %v", err)
			}
		})
	}
	// All-zero data: a valid configuration, but nothing to find.
	if _, err := Targets(a, ch, TargetConfig{}); !errors.Is(err, ErrNoTargets) {
		t.Errorf("silent record: error %v, want ErrNoTargets", err)
	}
}

func TestCombineSpeeds(t *testing.T) {
	t.Parallel()
	const tol = 1e-9
	cases := []struct {
		name           string
		v, se, sens    []float64
		sigmaT         float64
		mean, sem, sys float64
		chi2           float64
		inflated       bool
	}{
		// Derived: equal errors, no systematic: the plain mean, SE / sqrt(2);
		// chi2 = (0.5^2 + 0.5^2) / 1 = 0.5 < 3.841.
		{name: "agree", v: []float64{1500, 1501}, se: []float64{1, 1}, sens: []float64{0, 0},
			mean: 1500.5, sem: 1 / math.Sqrt2, chi2: 0.5},
		// Derived: chi2 = (5^2 + 5^2) / 1 = 50 > 3.841 on 1 dof; the SE is
		// inflated by sqrt(50).
		{name: "scatter", v: []float64{1495, 1505}, se: []float64{1, 1}, sens: []float64{0, 0},
			mean: 1500, sem: math.Sqrt(50) / math.Sqrt2, chi2: 50, inflated: true},
		// Derived: weights 1/1 and 1/4: mean (1500 + 1510/4) / 1.25 = 1502;
		// statistical SE sqrt((0.8)^2 1 + (0.2)^2 4) = sqrt(0.8); chi2 =
		// 2^2 / 1 + 8^2 / 4 = 20 > 3.841, so inflated by sqrt(20).
		{name: "weighted", v: []float64{1500, 1510}, se: []float64{1, 2}, sens: []float64{0, 0},
			mean: 1502, sem: math.Sqrt(0.8) * math.Sqrt(20), chi2: 20, inflated: true},
		// Derived: a systematic part common to both: u^2 = 0.09 + 0.16 = 0.25
		// each, equal weights; systematic 0.2 * 2 = 0.4, statistical SE
		// 0.3 / sqrt(2); chi2 = 0.
		{name: "systematic", v: []float64{1500, 1500}, se: []float64{0.3, 0.3}, sens: []float64{-0.2, -0.2}, sigmaT: 2,
			mean: 1500, sem: 0.3 / math.Sqrt2, sys: 0.4},
		// One target: its own values, no chi-square.
		{name: "single", v: []float64{1480}, se: []float64{0.5}, sens: []float64{0.1}, sigmaT: 1,
			mean: 1480, sem: 0.5, sys: 0.1},
	}
	for _, tc := range cases {
		got := combineSpeeds(tc.v, tc.se, tc.sens, tc.sigmaT)
		if math.Abs(got.mean-tc.mean) > tol || math.Abs(got.se-tc.sem) > tol || math.Abs(got.sys-tc.sys) > tol ||
			got.inflated != tc.inflated || math.Abs(got.chi2-tc.chi2) > tol {
			t.Errorf("%s: got %+v, want mean %g se %g sys %g chi2 %g inflated %v", tc.name, got, tc.mean, tc.sem, tc.sys, tc.chi2, tc.inflated)
		}
	}
}

func TestTargetQuantiles(t *testing.T) {
	t.Parallel()
	// Standard statistical tables (e.g. Abramowitz & Stegun, Tables 26.8 and
	// 26.10; values from memory): beyond the tabulated range the
	// approximations must stay within 0.2 %.
	cases := []struct {
		dof     int
		chi, tq float64
	}{
		{1, 3.841, 12.706}, {2, 5.991, 4.303}, {7, 14.067, 2.365},
		{11, 19.675, 2.201}, {15, 24.996, 2.131}, {30, 43.773, 2.042}, {120, 146.567, 1.980},
	}
	for _, tc := range cases {
		if got := chiSquare95(tc.dof); math.Abs(got/tc.chi-1) > 2e-3 {
			t.Errorf("chi-square 95 %% quantile, %d dof: %.3f, want %.3f", tc.dof, got, tc.chi)
		}
		if got := studentT975(tc.dof); math.Abs(got/tc.tq-1) > 2e-3 {
			t.Errorf("t 97.5 %% quantile, %d dof: %.3f, want %.3f", tc.dof, got, tc.tq)
		}
	}
}

// The result marshals to JSON with the shared Result fields at the top level.
func TestTargetResultJSON(t *testing.T) {
	t.Parallel()
	r := TargetResult{Result: Result{SpeedMPS: 1500, Method: "targets", Confidence: High},
		Targets: []TargetFit{{XM: 0.001, ZM: 0.02, SpeedMPS: 1500, Channels: 100}}}
	b, err := json.Marshal(r)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	for _, want := range []string{`"speed_mps":1500`, `"method":"targets"`, `"targets":[{"x_m":0.001,"z_m":0.02`, `"channels":100`} {
		if !strings.Contains(s, want) {
			t.Errorf("JSON %s lacks %s", s, want)
		}
	}
}

// A wire 20 mm deep in a 1480 m/s medium, seen with a 0-degree plane wave
// fired by a scanner that assumes 1540 m/s.
func ExampleTargets() {
	p, _ := sim.Preset("linear-128")
	snr := 30.0
	a, err := sim.Simulate(&sim.Config{Probe: p, Events: acq.PlaneWaveSequence(&p, []float64{0}, 1540),
		AssumedSpeedMPS: 1540, SamplingRateHz: 20e6, NumSamples: 900, Medium: sim.Homogeneous(1480),
		Scatterers: []sim.Scatterer{{X: 2e-3, Z: 20e-3, Amp: 1}}, NoiseSNRDB: &snr, Seed: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := Targets(a, ch, TargetConfig{Region: &Region{X0: -5e-3, X1: 5e-3, Z0: 15e-3, Z1: 25e-3}})
	if err != nil {
		fmt.Println(err)
		return
	}
	w := res.Targets[0]
	fmt.Printf("%.1f m/s (%s confidence); wire at (%.2f, %.2f) mm\n", res.SpeedMPS, res.Confidence, w.XM*1e3, w.ZM*1e3)
	// Output:
	// 1480.0 m/s (high confidence); wire at (2.00, 20.00) mm
}
