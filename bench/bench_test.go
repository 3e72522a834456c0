package bench

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"celerity/acq"
	"celerity/internal/jobs"
	"celerity/sim"
)

// tinySuite is a fast suite for end-to-end tests: a 32-element array, three
// plane waves, a little speckle, one wire and a cyst behind a screen, at two
// speeds.
const tinySuite = `format: celerity.suite/1
name: tiny
base:
  probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, element_width_mm: 0.27, count: 32, pitch_mm: 0.3}
  depth_mm: 16
  transmit:
    plane_waves: {count: 3, max_angle_deg: 6}
  medium: {speed_mps: 1540}
  screen: {rms_ns: 20, correlation_length_mm: 2.5}
  phantom:
    speckle: {region_mm: [-4, 4, 4, 15], density: 8}
    targets: {positions_mm: [[0, 8]]}
    inclusions:
      - {center_mm: [1, 12], radius_mm: 1.5, contrast_db: -100}
  noise: {snr_db: 30}
grid:
  medium.speed_mps: [1500, 1560]
seeds: [1]
`

func csvOf(t *testing.T, r *Results) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := WriteResultsCSV(&b, r); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func summaryOf(t *testing.T, r *Results) []byte {
	t.Helper()
	s := Summarize(r)
	s.Timing = nil
	b, err := json.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestTinySuiteEndToEnd runs every built-in estimator on a tiny suite, then
// the same suite in two shards sharing the case cache, and checks that the
// merge of the shards gives the same table and summary (determinism across
// workers and shards), that each case was simulated once, and that the
// acquisition folders hold no truth.
func TestTinySuiteEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("simulates and runs every estimator")
	}
	t.Parallel()
	s, err := ParseSuite("tiny.yaml", "tiny", []byte(tinySuite))
	if err != nil {
		t.Fatal(err)
	}
	work := t.TempDir()
	cache := filepath.Join(work, "cases")
	whole, err := Run(context.Background(), s, Options{Out: filepath.Join(work, "whole"), Cache: cache, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	if len(whole.Failed) != 0 || len(whole.Missing) != 0 {
		t.Fatalf("failed cases %+v, missing %d", whole.Failed, len(whole.Missing))
	}
	if n := len(whole.Lines); n != 2*len(BuiltinNames()) {
		t.Fatalf("%d rows, want %d (two cases, every built-in estimator)", n, 2*len(BuiltinNames()))
	}
	for _, l := range whole.Lines {
		if l.Status != "ok" {
			t.Errorf("%s on %s: %s", l.Estimator, l.Case.Group, l.Error)
			continue
		}
		speedish := l.Estimator[:6] == "speed-"
		if speedish != finite(float64(l.SpeedErrorMPS)) || speedish == finite(float64(l.ProfileErrorFrac)) {
			t.Errorf("%s: speed error %v, profile error %v", l.Estimator, l.SpeedErrorMPS, l.ProfileErrorFrac)
		}
		if !finite(float64(l.GCNRAfter)) || !finite(float64(l.LateralAfterMM)) {
			t.Errorf("%s: no image scores: %+v", l.Estimator, l.Row)
		}
		// the true speed of a homogeneous case is its medium's speed
		if want := l.Case.Scenario.Layers[0].SpeedMPS; l.TrueSpeedMPS != want {
			t.Errorf("true speed %g, want %g", l.TrueSpeedMPS, want)
		}
		// 20 ns drawn screens: the rms is exact (docs/scenario.md)
		if math.Abs(l.ScreenRMSNS-20) > 1e-6 {
			t.Errorf("screen rms %g ns, want 20", l.ScreenRMSNS)
		}
	}
	for _, c := range s.Cases {
		p := casePaths(cache, c.ID)
		if _, err := os.Stat(filepath.Join(p.Acquisition, acq.TruthName)); err == nil {
			t.Errorf("case %s: the acquisition folder holds the truth", c.ID)
		}
		if _, err := os.Stat(filepath.Join(p.Acquisition, acq.TruthScreenName)); err == nil {
			t.Errorf("case %s: the acquisition folder holds the true screen", c.ID)
		}
		if _, err := acq.LoadTruthFile(filepath.Join(p.Truth, acq.TruthName)); err != nil {
			t.Errorf("case %s: %v", c.ID, err)
		}
	}

	var dirs []string
	for i := 1; i <= 2; i++ {
		dir := filepath.Join(work, "shard", string(rune('0'+i)))
		part, err := Run(context.Background(), s, Options{Out: dir, Cache: cache, Workers: 1, Shard: jobs.Shard{Index: i, Count: 2}})
		if err != nil {
			t.Fatal(err)
		}
		if part.Scope != 1 || len(part.Lines) != len(BuiltinNames()) {
			t.Errorf("shard %d: scope %d, %d rows", i, part.Scope, len(part.Lines))
		}
		for id, g := range part.GenerateSeconds {
			if g != 0 {
				t.Errorf("shard %d simulated case %s again", i, id)
			}
		}
		dirs = append(dirs, dir)
	}
	ms, mm, recs, err := MergeInputs(dirs)
	if err != nil {
		t.Fatal(err)
	}
	merged, err := Collect(ms, mm, recs, nil)
	if err != nil {
		t.Fatal(err)
	}
	if a, b := csvOf(t, whole), csvOf(t, merged); !bytes.Equal(a, b) {
		t.Errorf("merged shards differ from the unsharded run:\n%s\nvs\n%s", a, b)
	}
	if a, b := summaryOf(t, whole), summaryOf(t, merged); !bytes.Equal(a, b) {
		t.Errorf("summaries differ:\n%s\nvs\n%s", a, b)
	}
}

func TestNearestRank(t *testing.T) {
	t.Parallel()
	v := []float64{5, 1, 4, 2, 3, 10, 9, 8, 7, 6}
	// nearest rank: the ceil(p n)-th smallest (p n = 9.5 gives the 10th)
	for _, c := range []struct{ p, want float64 }{{0.95, 10}, {0.9, 9}, {0.5, 5}, {0.01, 1}, {1, 10}} {
		if got := NearestRank(v, c.p); got != c.want {
			t.Errorf("NearestRank(p=%g) = %g, want %g", c.p, got, c.want)
		}
	}
	if !math.IsNaN(NearestRank(nil, 0.95)) {
		t.Error("no values: want NaN")
	}
	// 20 values: p n = 19 exactly, the 19th
	var w []float64
	for i := 1; i <= 20; i++ {
		w = append(w, float64(i))
	}
	if got := NearestRank(w, 0.95); got != 19 {
		t.Errorf("20 values: %g, want 19", got)
	}
}

func TestTrueSpeed(t *testing.T) {
	t.Parallel()
	layers := []acq.Layer{{ThicknessM: 12e-3, SpeedMPS: 1450}, {SpeedMPS: 1570}}
	speckle := &sim.SpeckleSpec{Region: sim.Region{X0: -0.015, X1: 0.015, Z0: 5e-3, Z1: 38e-3}}
	for _, c := range []struct {
		name  string
		sc    sim.Scenario
		truth acq.Truth
		want  float64
	}{
		{"homogeneous", sim.Scenario{Speckle: speckle}, acq.Truth{SpeedMPS: 1490}, 1490},
		// derived: vertical time-average speed to the speckle centre, 21.5 mm:
		// 21.5 mm / (12 mm / 1450 m/s + 9.5 mm / 1570 m/s)
		{"layers, speckle", sim.Scenario{Speckle: speckle}, acq.Truth{Layers: layers}, 21.5e-3 / (12e-3/1450 + 9.5e-3/1570)},
		// derived: to the mean target depth, 20 mm
		{"layers, targets", sim.Scenario{Targets: [][2]float64{{0, 10e-3}, {0, 30e-3}}}, acq.Truth{Layers: layers}, 20e-3 / (12e-3/1450 + 8e-3/1570)},
	} {
		got := TrueSpeed(&Case{Scenario: &c.sc}, &c.truth)
		// the tolerance covers rounding only
		if math.Abs(got-c.want) > 1e-9 {
			t.Errorf("%s: %.9f m/s, want %.9f", c.name, got, c.want)
		}
	}
}
