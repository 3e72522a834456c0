package speed

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"

	"celerity/acq"
	"celerity/recon"
	"celerity/sim"
	"celerity/speed/refspeed"
)

// The validation table of the speed estimators against simulated ground
// truth. It takes 20-40 minutes on two cores, so it runs only when asked:
//
//	CELERITY_VALIDATE=1 CELERITY_VALIDATE_OUT=/tmp/speed_validation.md \
//	    go test ./speed -run TestValidationTable -timeout 90m -v
//
// CELERITY_VALIDATE_SEEDS sets the number of seeds (default 8). The table
// goes to the file named by CELERITY_VALIDATE_OUT, or to the test log.
// docs/validation.md holds the table as measured and its discussion.

// valTrial is one estimate against its truth.
type valTrial struct {
	truth, est float64
	ci         [2]float64
	high       bool
	seconds    float64
}

func (tr valTrial) err() float64 { return tr.est - tr.truth }

func (tr valTrial) covered() bool { return tr.ci[0] <= tr.truth && tr.truth <= tr.ci[1] }

// valRow is one row of the table: a case, the trials over speeds and seeds,
// and the target it is held to (nil: informative only).
type valRow struct {
	name, criterion, target string
	meets                   func(r *valRow) bool
	trials                  []valTrial
}

func (r *valRow) stats() (bias, rms, maxAbs, coverage, high, secs float64) {
	n := float64(len(r.trials))
	for _, tr := range r.trials {
		e := tr.err()
		bias += e
		rms += e * e
		maxAbs = math.Max(maxAbs, math.Abs(e))
		if tr.covered() {
			coverage++
		}
		if tr.high {
			high++
		}
		secs += tr.seconds
	}
	return bias / n, math.Sqrt(rms / n), maxAbs, coverage / n, high / n, secs / n
}

// accuracy is the target "|error| <= maxErr in every trial and the 95 %
// interval covering the truth in at least 90 % of them".
func accuracy(maxErr float64) func(r *valRow) bool {
	return func(r *valRow) bool {
		_, _, m, cov, _, _ := r.stats()
		return m <= maxErr && cov >= 0.9
	}
}

// errorOnly is the target "|error| <= maxErr in every trial".
func errorOnly(maxErr float64) func(r *valRow) bool {
	return func(r *valRow) bool {
		_, _, m, _, _, _ := r.stats()
		return m <= maxErr
	}
}

// withinOrLow is the single-plane-wave target: every trial within maxErr or
// flagged low confidence (so never high confidence with a larger error).
func withinOrLow(maxErr float64) func(r *valRow) bool {
	return func(r *valRow) bool {
		for _, tr := range r.trials {
			if tr.high && math.Abs(tr.err()) > maxErr {
				return false
			}
		}
		return true
	}
}

// valTable collects rows in order and the per-speed errors of the main
// sequences.
type valTable struct {
	rows     []*valRow
	bySpeed  map[string]map[float64][]float64
	seqOrder []string
}

func (vt *valTable) row(name, criterion, target string, meets func(*valRow) bool) *valRow {
	for _, r := range vt.rows {
		if r.name == name && r.criterion == criterion {
			return r
		}
	}
	r := &valRow{name: name, criterion: criterion, target: target, meets: meets}
	vt.rows = append(vt.rows, r)
	return r
}

func (vt *valTable) speedErr(seq string, truth, e float64) {
	if vt.bySpeed == nil {
		vt.bySpeed = map[string]map[float64][]float64{}
	}
	if vt.bySpeed[seq] == nil {
		vt.bySpeed[seq] = map[float64][]float64{}
		vt.seqOrder = append(vt.seqOrder, seq)
	}
	vt.bySpeed[seq][truth] = append(vt.bySpeed[seq][truth], e)
}

func (vt *valTable) markdown(seeds int, elapsed time.Duration) string {
	var b strings.Builder
	fmt.Fprintf(&b, "Seeds per case: %d. Go %s, GOMAXPROCS %d, %s/%s. Total time %.1f min (simulation included).\n\n",
		seeds, runtime.Version(), runtime.GOMAXPROCS(0), runtime.GOOS, runtime.GOARCH, elapsed.Minutes())
	b.WriteString("| case | criterion | target | n | bias (m/s) | rms error (m/s) | max abs error (m/s) | 95 % coverage | high confidence | s per estimate | meets target |\n")
	b.WriteString("|---|---|---|---|---|---|---|---|---|---|---|\n")
	for _, r := range vt.rows {
		if len(r.trials) == 0 {
			continue
		}
		bias, rms, m, cov, high, secs := r.stats()
		meets := "(informative)"
		if r.meets != nil {
			meets = "no"
			if r.meets(r) {
				meets = "yes"
			}
		}
		fmt.Fprintf(&b, "| %s | %s | %s | %d | %+.2f | %.2f | %.2f | %.0f %% | %.0f %% | %.2f | %s |\n",
			r.name, r.criterion, r.target, len(r.trials), bias, rms, m, 100*cov, 100*high, secs, meets)
	}
	if len(vt.seqOrder) > 0 {
		var speeds []float64
		for v := range vt.bySpeed[vt.seqOrder[0]] {
			speeds = append(speeds, v)
		}
		sort.Float64s(speeds)
		b.WriteString("\nMean error (m/s) by true speed, default criterion:\n\n| case |")
		for _, v := range speeds {
			fmt.Fprintf(&b, " %.0f m/s |", v)
		}
		b.WriteString("\n|---|")
		for range speeds {
			b.WriteString("---|")
		}
		b.WriteString("\n")
		for _, seq := range vt.seqOrder {
			fmt.Fprintf(&b, "| %s |", seq)
			for _, v := range speeds {
				es := vt.bySpeed[seq][v]
				m := 0.0
				for _, e := range es {
					m += e
				}
				fmt.Fprintf(&b, " %+.2f |", m/float64(len(es)))
			}
			b.WriteString("\n")
		}
	}
	return b.String()
}

// The geometry shared by the homogeneous cases (the same as the unit tests):
// speckle 20 x 14 mm centred at 22 mm, criterion region 12 x 10 mm from
// 17 mm at 1540 m/s.
var valSpeckle = sim.Region{X0: -10e-3, X1: 10e-3, Z0: 15e-3, Z1: 29e-3}

// Plane-wave sequences as subsets of 41 plane waves over +/-16 degrees
// (0.8 degree steps): the simulator synthesises plane waves from its
// single-element records, so one record serves every sequence.
var (
	val41    = acq.SpreadAngles(41, 16)
	val5x8   = []int{10, 15, 20, 25, 30}
	val11x8  = stepIdx(10, 30, 2)
	val21x16 = stepIdx(0, 40, 2)
	val1     = []int{20}
)

func stepIdx(lo, hi, step int) []int {
	var out []int
	for i := lo; i <= hi; i += step {
		out = append(out, i)
	}
	return out
}

func valSeeds(t *testing.T) int {
	s := os.Getenv("CELERITY_VALIDATE_SEEDS")
	if s == "" {
		return 8
	}
	n, err := strconv.Atoi(s)
	if err != nil || n < 1 {
		t.Fatalf("CELERITY_VALIDATE_SEEDS=%q: want a positive whole number", s)
	}
	return n
}

func TestValidationTable(t *testing.T) {
	if os.Getenv("CELERITY_VALIDATE") != "1" {
		t.Skip("the validation table takes 20-40 minutes: set CELERITY_VALIDATE=1 to run it")
	}
	seeds := valSeeds(t)
	t0 := time.Now()
	p, err := sim.Preset("linear-128")
	if err != nil {
		t.Fatal(err)
	}
	vt := &valTable{}
	// Row order of the table.
	const (
		cf    = "coherence-factor"
		tx    = "transmit-coherence"
		pw5   = "5 plane waves, +/-8 deg"
		pw11  = "11 plane waves, +/-8 deg"
		pw21  = "21 plane waves, +/-16 deg"
		sa    = "synthetic aperture (128 events, default subset of 32)"
		saC11 = "synthetic aperture, 11 central transmitters"
		saC5  = "synthetic aperture, 5 central transmitters"
		pw1   = "1 plane wave (0 deg)"
	)
	// The default criterion: transmit coherence on compounded plane waves,
	// the coherence factor on synthetic aperture and a single wave.
	vt.row(pw5, tx, "max 5 m/s, coverage >= 90 %", accuracy(5))
	vt.row(pw11, tx, "max 3 m/s, coverage >= 90 %", accuracy(3))
	vt.row(pw21, tx, "max 3 m/s, coverage >= 90 %", accuracy(3))
	vt.row(sa, cf, "max 3 m/s, coverage >= 90 %", accuracy(3))
	vt.row(pw1, cf, "within 10 m/s or low confidence", withinOrLow(10))
	vt.row(pw5, cf, "", nil)
	compare := []Criterion{CoherenceFactor, LagOneCoherence, ShortLagCoherence, Brightness}
	for _, c := range compare {
		vt.row(pw11, c.String(), "", nil)
	}
	vt.row(saC11, cf, "", nil)
	vt.row(saC5, cf, "", nil)

	estimate := func(row *valRow, seq string, a *acq.Acquisition, ch *recon.Channels, truth float64, cfg SweepConfig) {
		t.Helper()
		r := homRegion
		if cfg.Region == nil {
			cfg.Region = &r
		}
		s := time.Now()
		res, err := Sweep(a, ch, cfg)
		if err != nil {
			t.Errorf("%s at %g m/s: %v", row.name, truth, err)
			return
		}
		if res.Criterion != row.criterion {
			t.Errorf("%s: the sweep used %s, the row says %s", row.name, res.Criterion, row.criterion)
		}
		tr := valTrial{truth: truth, est: res.SpeedMPS, ci: res.CI95MPS, high: res.Confidence == High, seconds: time.Since(s).Seconds()}
		row.trials = append(row.trials, tr)
		if seq != "" {
			vt.speedErr(seq, truth, tr.err())
		}
		t.Logf("  %-32s %-20s truth %6.1f: estimate %7.2f (%+6.2f), interval %7.1f..%7.1f, %s, %.1f s",
			row.name, row.criterion, truth, res.SpeedMPS, tr.err(), res.CI95MPS[0], res.CI95MPS[1], res.Confidence, tr.seconds)
	}
	simulate := func(s speckleSim) (*acq.Acquisition, *recon.Channels) {
		t.Helper()
		st := time.Now()
		a, ch, err := s.run()
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("simulated %d events in %.1f s", a.NumEvents(), time.Since(st).Seconds())
		return a, ch
	}

	speeds := []float64{1440, 1490, 1540, 1590}
	for seed := uint64(1); seed <= uint64(seeds); seed++ {
		// Homogeneous speckle: plane waves and synthetic aperture.
		for _, c := range speeds {
			t.Logf("seed %d, homogeneous %g m/s", seed, c)
			a, ch := simulate(speckleSim{medium: sim.Homogeneous(c), events: acq.PlaneWaveSequence(&p, val41, 1540),
				speckle: valSpeckle, depthM: 30e-3, snrDB: 20, seed: 100*seed + uint64(c)})
			estimate(vt.row(pw5, tx, "", nil), pw5, a, ch, c, SweepConfig{Events: val5x8, Seed: seed})
			estimate(vt.row(pw11, tx, "", nil), pw11, a, ch, c, SweepConfig{Events: val11x8, Seed: seed})
			estimate(vt.row(pw21, tx, "", nil), pw21, a, ch, c, SweepConfig{Events: val21x16, Seed: seed})
			estimate(vt.row(pw1, cf, "", nil), "", a, ch, c, SweepConfig{Events: val1, Seed: seed})
			estimate(vt.row(pw5, cf, "", nil), "", a, ch, c, SweepConfig{Events: val5x8, Criterion: CoherenceFactor, Seed: seed})
			for _, crit := range compare {
				estimate(vt.row(pw11, crit.String(), "", nil), "", a, ch, c, SweepConfig{Events: val11x8, Criterion: crit, Seed: seed})
			}
			a, ch = simulate(speckleSim{medium: sim.Homogeneous(c), events: acq.SyntheticApertureSequence(&p),
				speckle: valSpeckle, depthM: 30e-3, snrDB: 20, seed: 100*seed + uint64(c)})
			estimate(vt.row(sa, cf, "", nil), sa, a, ch, c, SweepConfig{Seed: seed})
			// The same record with only the central transmitters: a weak
			// transmit focus, as with a narrow span of plane waves, but with
			// the beamformer's point-source model exact (informative).
			estimate(vt.row(saC11, cf, "", nil), "", a, ch, c, SweepConfig{Events: stepIdx(58, 68, 1), Seed: seed})
			estimate(vt.row(saC5, cf, "", nil), "", a, ch, c, SweepConfig{Events: stepIdx(61, 65, 1), Seed: seed})
		}
	}
	// Through a chest-wall-like screen: 21 ns rms arrival-time error with a
	// 2.5 mm correlation length (Hinkelman, Szabo & Waag, JASA 1997;
	// CHECKS.md), 11 plane waves over +/-8 degrees (and, informative, 21 over
	// +/-16), the sweep alone (no aberration correction).
	screenRow := vt.row("chest-wall screen 21 ns / 2.5 mm, 11 plane waves, +/-8 deg", tx, "max 10 m/s", errorOnly(10))
	screenRow21 := vt.row("chest-wall screen 21 ns / 2.5 mm, 21 plane waves, +/-16 deg", tx, "", nil)
	screenRowCF := vt.row("chest-wall screen 21 ns / 2.5 mm, 11 plane waves, +/-8 deg", cf, "", nil)
	for seed := uint64(1); seed <= uint64(seeds); seed++ {
		for _, c := range speeds {
			els := p.Elements()
			xs, zs := make([]float64, len(els)), make([]float64, len(els))
			for i, e := range els {
				xs[i], zs[i] = e.X, e.Z
			}
			scr, err := sim.DrawScreen(rand.New(rand.NewPCG(seed, uint64(c))), sim.ScreenPositions(xs, zs), 21e-9, 2.5e-3)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("seed %d, screen, %g m/s", seed, c)
			a, ch := simulate(speckleSim{medium: sim.Homogeneous(c), events: acq.PlaneWaveSequence(&p, val41, 1540),
				speckle: valSpeckle, depthM: 30e-3, snrDB: 20, screen: scr, seed: 200*seed + uint64(c)})
			estimate(screenRow, "", a, ch, c, SweepConfig{Events: val11x8, Seed: seed})
			estimate(screenRow21, "", a, ch, c, SweepConfig{Events: val21x16, Seed: seed})
			estimate(screenRowCF, "", a, ch, c, SweepConfig{Events: val11x8, Criterion: CoherenceFactor, Seed: seed})
		}
	}
	// A fat-like layer: 15 mm at 1450 m/s over 1570 m/s, by depth, with two
	// compounded plane-wave sequences; region as in TestByDepthFatLayer.
	type layerRows struct{ top, bottom *valRow }
	fatRows := map[string]layerRows{}
	fatCF := pw11 + ", " + cf
	for _, seq := range []string{pw11, pw21} {
		fatRows[seq] = layerRows{
			vt.row("fat 15 mm 1450 over 1570, "+seq+": shallowest layer", tx, "within 15 m/s", errorOnly(15)),
			vt.row("fat 15 mm 1450 over 1570, "+seq+": deepest layer", tx, "within 15 m/s", errorOnly(15)),
		}
	}
	fatRows[fatCF] = layerRows{
		vt.row("fat 15 mm 1450 over 1570, "+pw11+": shallowest layer", cf, "", nil),
		vt.row("fat 15 mm 1450 over 1570, "+pw11+": deepest layer", cf, "", nil),
	}
	for seed := uint64(1); seed <= uint64(seeds); seed++ {
		t.Logf("seed %d, fat layer", seed)
		a, ch := simulate(speckleSim{medium: sim.Layered(acq.Layer{SpeedMPS: 1450, ThicknessM: 15e-3}, acq.Layer{SpeedMPS: 1570}),
			events: acq.PlaneWaveSequence(&p, val41, 1540), speckle: sim.Region{X0: -8e-3, X1: 8e-3, Z0: 3e-3, Z1: 32e-3},
			depthM: 33e-3, snrDB: 20, seed: 300 * seed})
		for _, seq := range []string{pw11, pw21, fatCF} {
			evs := val11x8
			if seq == pw21 {
				evs = val21x16
			}
			var crit Criterion
			if seq == fatCF {
				crit = CoherenceFactor
			}
			r := Region{X0: -5e-3, X1: 5e-3, Z0: 6e-3, Z1: 31e-3}
			s := time.Now()
			res, err := ByDepth(a, ch, DepthConfig{SweepConfig: SweepConfig{Region: &r, Events: evs, Criterion: crit, Seed: seed}})
			if err != nil {
				t.Errorf("fat layer, %s: %v", seq, err)
				continue
			}
			secs := time.Since(s).Seconds()
			top, bot := res.Layers[0], res.Layers[len(res.Layers)-1]
			high := res.Confidence == High
			fatRows[seq].top.trials = append(fatRows[seq].top.trials, valTrial{truth: 1450, est: top.SpeedMPS, ci: top.CI95MPS, high: high, seconds: secs})
			fatRows[seq].bottom.trials = append(fatRows[seq].bottom.trials, valTrial{truth: 1570, est: bot.SpeedMPS, ci: bot.CI95MPS, high: high, seconds: secs})
			var ls []string
			for _, l := range res.Layers {
				ls = append(ls, fmt.Sprintf("%.1f-%.1f mm %.1f", l.TopM*1e3, l.BottomM*1e3, l.SpeedMPS))
			}
			t.Logf("  %s: layers %s; %s, %.1f s", seq, strings.Join(ls, ", "), res.Confidence, secs)
		}
	}
	// Pure water at 20 C with three wires and a little speckle, from a
	// scenario file, estimated with the sweep and compared with the
	// reference speed of Marczak (JASA 102(5), 1997) via refspeed.Water.
	const waterC = 20.0
	want, err := refspeed.Water(waterC)
	if err != nil {
		t.Fatal(err)
	}
	waterRow := vt.row(fmt.Sprintf("water at %g C (%.2f m/s, Marczak 1997), wires + sparse speckle, 11 plane waves", waterC, want),
		tx, "max 3 m/s", errorOnly(3))
	waterRowCF := vt.row(fmt.Sprintf("water at %g C (%.2f m/s, Marczak 1997), wires + sparse speckle, 11 plane waves", waterC, want),
		cf, "", nil)
	for seed := uint64(1); seed <= uint64(seeds); seed++ {
		sc, err := sim.ParseScenario("water.yaml", []byte(fmt.Sprintf(valWaterYAML, seed, waterC)))
		if err != nil {
			t.Fatal(err)
		}
		cfg, _, err := sc.Build()
		if err != nil {
			t.Fatal(err)
		}
		st := time.Now()
		a, err := sim.Simulate(cfg)
		if err != nil {
			t.Fatal(err)
		}
		ch, err := recon.Prepare(a)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("seed %d, water: simulated in %.1f s", seed, time.Since(st).Seconds())
		estimate(waterRow, "", a, ch, want, SweepConfig{Seed: seed})
		estimate(waterRowCF, "", a, ch, want, SweepConfig{Criterion: CoherenceFactor, Seed: seed})
	}
	// The near field: the same homogeneous speckle from 2 mm, windows 5 mm
	// deep at increasing depth (informative: the automatic region starts at
	// 0.4 times the array length, 15.2 mm here, for this reason).
	for seed := uint64(1); seed <= uint64(seeds); seed++ {
		const c = 1490.0
		t.Logf("seed %d, near field", seed)
		a, ch := simulate(speckleSim{medium: sim.Homogeneous(c), events: acq.PlaneWaveSequence(&p, val41, 1540),
			speckle: sim.Region{X0: -8e-3, X1: 8e-3, Z0: 2e-3, Z1: 26e-3}, depthM: 27e-3, snrDB: 20, seed: 400 * seed})
		for _, seq := range []string{pw11, pw21} {
			evs := val11x8
			if seq == pw21 {
				evs = val21x16
			}
			for _, z0 := range []float64{4e-3, 7e-3, 10e-3, 13e-3, 16e-3, 19e-3} {
				r := Region{X0: -5e-3, X1: 5e-3, Z0: z0, Z1: z0 + 5e-3}
				name := fmt.Sprintf("near field, %s, region %.0f-%.0f mm", seq, z0*1e3, (z0+5e-3)*1e3)
				estimate(vt.row(name, tx, "", nil), "", a, ch, c, SweepConfig{Events: evs, Region: &r, Seed: seed})
				estimate(vt.row(name, cf, "", nil), "", a, ch, c, SweepConfig{Events: evs, Region: &r, Criterion: CoherenceFactor, Seed: seed})
			}
		}
	}

	out := vt.markdown(seeds, time.Since(t0))
	if path := os.Getenv("CELERITY_VALIDATE_OUT"); path != "" {
		if err := os.WriteFile(path, []byte(out), 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("table written to %s", path)
	} else {
		t.Log("\n" + out)
	}
	for _, r := range vt.rows {
		if r.meets != nil && len(r.trials) > 0 && !r.meets(r) {
			t.Errorf("%s (%s): target %q not met", r.name, r.criterion, r.target)
		}
	}
}

// valWaterYAML is the water scenario; %d is the seed and %g the temperature.
const valWaterYAML = `format: celerity.scenario/1
description: pure water with three wires and sparse speckle
seed: %d
probe: {preset: linear-128}
depth_mm: 30
transmit:
  plane_waves: {count: 11, max_angle_deg: 8}
medium:
  water_temperature_c: %g
phantom:
  speckle: {region_mm: [-10, 10, 15, 29], density: 1}
  targets:
    positions_mm: [[-4, 19], [0, 22], [4, 25]]
    amplitude: 30
noise: {snr_db: 30}
`
