package sim

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"celerity/acq"
)

// scenarioDir holds the scenario files shipped with the project.
const scenarioDir = "../testdata/scenarios"

// TestScenarioFiles: every shipped scenario parses, builds a valid
// configuration and truth, records deep enough for its deepest point, and
// builds identically twice (same seed, same phantom, screen and events).
func TestScenarioFiles(t *testing.T) {
	t.Parallel()
	files, err := filepath.Glob(filepath.Join(scenarioDir, "*.yaml"))
	checkNoErr(t, err)
	if len(files) == 0 {
		t.Fatalf("no scenario files in %s", scenarioDir)
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			t.Parallel()
			sc, err := LoadScenario(f)
			checkNoErr(t, err)
			cfg, truth, err := sc.Build()
			checkNoErr(t, err)
			checkNoErr(t, cfg.Validate())
			checkNoErr(t, truth.Validate(cfg.Probe.NumElements()))
			if len(cfg.Scatterers) == 0 {
				t.Error("no scatterers")
			}
			// the record reaches the two-way time of the deepest point at the
			// slowest speed from the farthest element, after the last firing
			maxDelay := 0.0
			for _, ev := range cfg.Events {
				for _, d := range ev.Delays {
					maxDelay = math.Max(maxDelay, d)
				}
			}
			tEnd := (sc.DepthM+math.Hypot(sc.DepthM, cfg.Probe.Aperture()))/cfg.Medium.MinSpeed() + maxDelay
			if got := float64(cfg.NumSamples) / cfg.SamplingRateHz; got < tEnd {
				t.Errorf("record ends at %.2f us, the deepest echo arrives up to %.2f us", got*1e6, tEnd*1e6)
			}
			cfg2, truth2, err := sc.Build()
			checkNoErr(t, err)
			if !reflect.DeepEqual(cfg, cfg2) || !reflect.DeepEqual(truth, truth2) {
				t.Error("two builds of the same scenario differ")
			}
			// and a fresh parse builds the same again
			sc3, err := LoadScenario(f)
			checkNoErr(t, err)
			cfg3, _, err := sc3.Build()
			checkNoErr(t, err)
			if !reflect.DeepEqual(cfg, cfg3) {
				t.Error("a second parse builds a different configuration")
			}
			t.Logf("%d events x %d elements x %d samples, %d scatterers", len(cfg.Events), cfg.Probe.NumElements(), cfg.NumSamples, len(cfg.Scatterers))
		})
	}
}

// baseScenario is a small valid scenario; the error cases edit it.
const baseScenario = `format: celerity.scenario/1
description: "test"
seed: 3
probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 32, pitch_mm: 0.3}
depth_mm: 30
transmit:
  plane_waves: {angles_deg: [-5, 0, 5]}
medium:
  speed_mps: 1540
phantom:
  targets:
    positions_mm: [[0, 20]]
`

// TestScenarioErrors: bad scenarios are rejected with an error that names the
// file, the dotted field and the line. The expected line is marked "# <-".
func TestScenarioErrors(t *testing.T) {
	t.Parallel()
	edit := func(old, new string) string {
		if !strings.Contains(baseScenario, old) {
			panic("test edit does not apply: " + old)
		}
		return strings.Replace(baseScenario, old, new, 1)
	}
	cases := []struct {
		name, yaml, field, msg string
	}{
		{"unknown top-level key", baseScenario + "colour: red # <-\n", "colour", "unknown key"},
		{"unknown probe key", edit("probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 32, pitch_mm: 0.3}",
			"probe: {preset: linear-128, count: 64} # <-"), "probe.count", "unknown key"},
		{"unknown transmit option", edit("plane_waves: {angles_deg: [-5, 0, 5]}", "plane_waves: {angles_deg: [0], max_angle_deg: 5} # <-"),
			"transmit.plane_waves.max_angle_deg", "unknown key"},
		{"wrong format", edit("format: celerity.scenario/1", "format: celerity.scenario/2 # <-"), "format", "unsupported format"},
		{"missing depth_mm", strings.Replace(edit("depth_mm: 30\n", ""), "format: celerity.scenario/1", "format: celerity.scenario/1 # <-", 1),
			"depth_mm", "required key is missing"},
		{"depth out of range", edit("depth_mm: 30", "depth_mm: -4 # <-"), "depth_mm", "must be between"},
		{"two transmit kinds", edit("  plane_waves: {angles_deg: [-5, 0, 5]}", "  plane_waves: {angles_deg: [0]} # <-\n  synthetic_aperture: {}"),
			"transmit", "exactly one of"},
		{"no transmit kind", edit("  plane_waves: {angles_deg: [-5, 0, 5]}", "  plane_wave: {angles_deg: [0]} # <-"),
			"transmit", "exactly one of"},
		{"steep plane wave", edit("angles_deg: [-5, 0, 5]}", "angles_deg: [0, 75]} # <-"), "transmit.plane_waves.angles_deg", "within +/-60"},
		{"virtual source in front", edit("  plane_waves: {angles_deg: [-5, 0, 5]}", "  diverging: {sources_mm: [[0, 10]]} # <-"),
			"transmit.diverging.sources_mm", "behind the array"},
		{"no virtual source", edit("  plane_waves: {angles_deg: [-5, 0, 5]}", "  diverging: {sources_mm: []} # <-"),
			"transmit.diverging.sources_mm", "at least one virtual source"},
		{"no plane-wave angle", edit("angles_deg: [-5, 0, 5]}", "angles_deg: []} # <-"), "transmit.plane_waves.angles_deg", "at least one angle"},
		{"two media", edit("  speed_mps: 1540", "  speed_mps: 1540 # <-\n  water_temperature_c: 20"), "medium", "exactly one of"},
		{"speed too low", edit("  speed_mps: 1540", "  speed_mps: 900 # <-"), "medium.speed_mps", "between 1000 and 2500"},
		{"layer speed too high", edit("  speed_mps: 1540", "  layers:\n    - {thickness_mm: 5, speed_mps: 3000} # <-\n    - {speed_mps: 1540}"),
			"medium.layers[0].speed_mps", "between 1000 and 2500"},
		{"thickness on the last layer", edit("  speed_mps: 1540", "  layers:\n    - {thickness_mm: 5, speed_mps: 1450}\n    - {thickness_mm: 10, speed_mps: 1540} # <-"),
			"medium.layers[1].thickness_mm", "last layer has no thickness"},
		{"no thickness on an upper layer", edit("  speed_mps: 1540", "  layers:\n    - {speed_mps: 1450} # <-\n    - {speed_mps: 1540}"),
			"medium.layers[0].thickness_mm", "required key is missing"},
		{"water too hot", edit("  speed_mps: 1540", "  water_temperature_c: 120 # <-"), "medium.water_temperature_c", "outside"},
		{"screen values of the wrong length", edit("phantom:", "screen: {values_ns: [1, 2, 3]} # <-\nphantom:"),
			"screen.values_ns", "3 values for 32 elements"},
		{"screen without correlation length", edit("phantom:", "screen: {rms_ns: 20} # <-\nphantom:"),
			"screen.correlation_length_mm", "required key is missing"},
		{"screen values and statistics", edit("phantom:", "screen: {values_ns: ["+strings.Repeat("0, ", 31)+"0], rms_ns: 20} # <-\nphantom:"),
			"screen.rms_ns", "unknown key"},
		{"no phantom", strings.Replace(edit("phantom:\n  targets:\n    positions_mm: [[0, 20]]\n", ""),
			"format: celerity.scenario/1", "format: celerity.scenario/1 # <-", 1), "phantom", "required key is missing"},
		{"empty phantom", edit("  targets:\n    positions_mm: [[0, 20]]\n", "  inclusions: [] # <-\n"), "phantom", "needs speckle, targets or both"},
		{"inclusions without speckle", edit("    positions_mm: [[0, 20]]\n", "    positions_mm: [[0, 20]]\n  inclusions:\n    - {center_mm: [0, 20], radius_mm: 2, contrast_db: -100} # <-\n"),
			"phantom.inclusions", "add a speckle region"},
		{"target above the array", edit("positions_mm: [[0, 20]]", "positions_mm: [[0, 20], [1, -2]] # <-"),
			"phantom.targets.positions_mm", "target 1 must lie below the array"},
		{"speckle region upside down", edit("  targets:\n    positions_mm: [[0, 20]]", "  speckle: {region_mm: [-5, 5, 20, 10]} # <-"),
			"phantom.speckle.region_mm", "z1 > z0 > 0"},
		{"sampling below Nyquist", baseScenario + "sampling_rate_mhz: 9 # <-\n", "sampling_rate_mhz", "below the Nyquist rate"},
		{"negative seed", edit("seed: 3", "seed: -1 # <-"), "seed", "must not be negative"},
		{"noise out of range", baseScenario + "noise: {snr_db: 500} # <-\n", "noise.snr_db", "between -40 and 200"},
		{"bad output kind", baseScenario + "output: {kind: wav} # <-\n", "output.kind", "must be rf or iq"},
		{"unknown preset", edit("probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 32, pitch_mm: 0.3}",
			"probe: {preset: linear-9000} # <-"), "probe.preset", "unknown probe preset"},
		{"speed as text", edit("  speed_mps: 1540", "  speed_mps: fast # <-"), "medium.speed_mps", "expected a number"},
	}
	dir := t.TempDir()
	for k, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			line := 0
			for i, l := range strings.Split(tc.yaml, "\n") {
				if strings.Contains(l, "# <-") {
					line = i + 1
				}
			}
			if line == 0 {
				t.Fatal("test case marks no line")
			}
			name := fmt.Sprintf("bad-%02d.yaml", k)
			path := filepath.Join(dir, name)
			checkNoErr(t, os.WriteFile(path, []byte(tc.yaml), 0o644))
			_, err := LoadScenario(path)
			if err == nil {
				t.Fatalf("accepted:\n%s", tc.yaml)
			}
			msg := err.Error()
			if !strings.HasPrefix(msg, name+": "+tc.field+": ") {
				t.Errorf("error %q does not start with file and field %q", msg, name+": "+tc.field+": ")
			}
			if !strings.Contains(msg, tc.msg) {
				t.Errorf("error %q does not say %q", msg, tc.msg)
			}
			if want := fmt.Sprintf("(line %d)", line); !strings.HasSuffix(msg, want) {
				t.Errorf("error %q does not end with %q", msg, want)
			}
		})
	}
}

// TestScenarioDefaults: the defaults documented in docs/scenario.md.
func TestScenarioDefaults(t *testing.T) {
	t.Parallel()
	sc, err := ParseScenario("base.yaml", []byte(strings.Replace(baseScenario, "seed: 3\n", "", 1)))
	checkNoErr(t, err)
	checks := []struct {
		name      string
		got, want float64
	}{
		{"seed", float64(sc.Seed), 1},
		{"sampling rate (4 f0)", sc.SamplingRateHz, 20e6},
		{"assumed speed", sc.AssumedSpeedMPS, DefaultAssumedSpeed},
		{"target amplitude", sc.TargetAmp, DefaultTargetAmp},
		{"attenuation", sc.AttenuationDBPerCmMHz, 0},
		{"element width", sc.Probe.ElementWidthM, 0},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("default %s = %g, want %g", c.name, c.got, c.want)
		}
	}
	if DefaultAssumedSpeed != 1540 || DefaultTargetAmp != 100 || DefaultDensity != 10 {
		t.Errorf("documented defaults changed: %g m/s, amplitude %g, density %g", DefaultAssumedSpeed, DefaultTargetAmp, DefaultDensity)
	}
	if sc.NoiseSNRDB != nil || sc.OutputIQ || sc.ScreenValuesS != nil || sc.ScreenRMSS != 0 {
		t.Error("noise, IQ output and screen must be off by default")
	}
	sp, err := ParseScenario("s.yaml", []byte(strings.Replace(baseScenario, "  targets:\n    positions_mm: [[0, 20]]", "  speckle: {region_mm: [-5, 5, 10, 20]}", 1)))
	checkNoErr(t, err)
	if sp.Speckle.Density != DefaultDensity {
		t.Errorf("default density %g, want %g", sp.Speckle.Density, DefaultDensity)
	}
}

// TestScenarioTransmit: what each transmit kind generates, read back from
// the firing delays (acq.DeriveWavefront at the assumed speed), as
// docs/scenario.md describes it.
func TestScenarioTransmit(t *testing.T) {
	t.Parallel()
	type src = [2]float64
	cases := []struct {
		name     string
		transmit string
		kind     acq.TransmitKind
		angles   []float64 // deg, plane waves
		sources  []src     // m, virtual sources
		firing   []int     // firing elements per event (0 = all)
	}{
		{"plane waves by angle", "plane_waves: {angles_deg: [-7, 2]}", acq.KindPlaneWave, []float64{-7, 2}, nil, nil},
		{"plane waves by count", "plane_waves: {count: 5, max_angle_deg: 10}", acq.KindPlaneWave, []float64{-10, -5, 0, 5, 10}, nil, nil},
		{"one plane wave", "plane_waves: {count: 1}", acq.KindPlaneWave, []float64{0}, nil, nil},
		{"diverging by source", "diverging: {sources_mm: [[1, -8], [-2, -20]]}", acq.KindDiverging, nil, []src{{0.001, -0.008}, {-0.002, -0.020}}, nil},
		{"diverging by count", "diverging: {count: 3, depth_mm: 10, span_mm: 6}", acq.KindDiverging, nil, []src{{-0.003, -0.01}, {0, -0.01}, {0.003, -0.01}}, nil},
		// F-number 2 at 20 mm: a 10 mm sub-aperture, 33 or 34 of 0.3 mm elements
		{"focused lines", "focused: {depth_mm: 20, lines: 3, span_mm: 4}", acq.KindFocused, nil, []src{{-0.002, 0.02}, {0, 0.02}, {0.002, 0.02}}, []int{33, 34, 33}},
		{"focused full aperture", "focused: {depth_mm: 20, lines: 1, fnumber: 0}", acq.KindFocused, nil, []src{{0, 0.02}}, []int{64}},
		{"synthetic aperture", "synthetic_aperture: {}", acq.KindSingleElement, nil, nil, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			y := strings.Replace(baseScenario, "plane_waves: {angles_deg: [-5, 0, 5]}", tc.transmit, 1)
			y = strings.Replace(y, "count: 32", "count: 64", 1)
			sc, err := ParseScenario("t.yaml", []byte(y))
			checkNoErr(t, err)
			cfg, _, err := sc.Build()
			checkNoErr(t, err)
			els := cfg.Probe.Elements()
			want := len(tc.angles) + len(tc.sources)
			if tc.kind == acq.KindSingleElement {
				want = len(els)
			}
			if len(cfg.Events) != want {
				t.Fatalf("%d events, want %d", len(cfg.Events), want)
			}
			for e := range cfg.Events {
				ev := &cfg.Events[e]
				w := acq.DeriveWavefront(els, ev, cfg.AssumedSpeedMPS, 0, cfg.Probe.CenterFrequencyHz)
				if w.Kind != tc.kind {
					t.Fatalf("event %d: %v, want %v", e, w.Kind, tc.kind)
				}
				switch tc.kind {
				case acq.KindPlaneWave:
					if got := w.Theta * 180 / math.Pi; math.Abs(got-tc.angles[e]) > 1e-6 {
						t.Errorf("event %d: %g deg, want %g", e, got, tc.angles[e])
					}
				case acq.KindDiverging, acq.KindFocused:
					if math.Hypot(w.VX-tc.sources[e][0], w.VZ-tc.sources[e][1]) > 1e-6 {
						t.Errorf("event %d: source (%g, %g), want %v", e, w.VX, w.VZ, tc.sources[e])
					}
				case acq.KindSingleElement:
					if w.Element != e {
						t.Errorf("event %d fires element %d", e, w.Element)
					}
				}
				nf := len(ev.Firing())
				if tc.firing != nil && nf != tc.firing[e] {
					t.Errorf("event %d fires %d elements, want %d", e, nf, tc.firing[e])
				}
				if tc.firing == nil && tc.kind != acq.KindSingleElement && nf != len(els) {
					t.Errorf("event %d fires %d elements, want all %d", e, nf, len(els))
				}
			}
		})
	}
}

// TestScenarioMediumScreenPhantom: medium, screen and phantom keys turn into
// the configuration and truth as documented.
func TestScenarioMediumScreenPhantom(t *testing.T) {
	t.Parallel()
	y := strings.Replace(baseScenario, "  speed_mps: 1540\n",
		"  layers:\n    - {thickness_mm: 5, speed_mps: 1450}\n    - {speed_mps: 1560}\n  attenuation_db_cm_mhz: 0.4\n", 1)
	y = strings.Replace(y, "phantom:\n  targets:\n    positions_mm: [[0, 20]]\n",
		"screen: {rms_ns: 30, correlation_length_mm: 4}\nphantom:\n  speckle: {region_mm: [-4, 4, 8, 16], density: 4}\n  targets:\n    positions_mm: [[0, 20], [1, 25]]\n    amplitude: 50\n  inclusions:\n    - {center_mm: [0, 12], radius_mm: 2, contrast_db: -120}\nnoise: {snr_db: 15}\noutput: {kind: iq}\n", 1)
	sc, err := ParseScenario("m.yaml", []byte(y))
	checkNoErr(t, err)
	cfg, truth, err := sc.Build()
	checkNoErr(t, err)
	if !sc.OutputIQ || cfg.NoiseSNRDB == nil || *cfg.NoiseSNRDB != 15 || *truth.NoiseSNRDB != 15 {
		t.Error("noise or output kind not carried over")
	}
	wantLayers := []acq.Layer{{ThicknessM: 0.005, SpeedMPS: 1450}, {SpeedMPS: 1560}}
	if !reflect.DeepEqual(cfg.Medium.Layers, wantLayers) || !reflect.DeepEqual(truth.Layers, wantLayers) || truth.SpeedMPS != 0 {
		t.Errorf("layers %v, truth %v / %g", cfg.Medium.Layers, truth.Layers, truth.SpeedMPS)
	}
	if cfg.Medium.AttenuationDBPerCmMHz != 0.4 || truth.AttenuationDBPerCmMHz != 0.4 {
		t.Error("attenuation not carried over")
	}
	// the screen is drawn with the requested rms, and the truth holds it
	var ss float64
	for _, v := range cfg.Screen {
		ss += v * v
	}
	if rms := math.Sqrt(ss / float64(len(cfg.Screen))); math.Abs(rms-30e-9) > 1e-20 || truth.Screen == nil ||
		!reflect.DeepEqual(truth.Screen.DelaysS, cfg.Screen) || truth.Screen.CorrelationLengthM != 0.004 {
		t.Errorf("screen rms %g, truth %+v", rms, truth.Screen)
	}
	// speckle: density per resolution cell at the mean speed down to the
	// region's bottom, minus the anechoic inclusion; then the two targets
	pulse := Pulse{CenterHz: 5e6, Bandwidth: 0.7}
	lat, ax := ResolutionCell(pulse, cfg.Medium.MeanSpeed(0.016))
	nSpeckle := int(math.Round(4 * 0.008 * 0.008 / (lat * ax)))
	var targets, inside int
	for _, s := range cfg.Scatterers {
		if s.Amp == 50 {
			targets++
			continue
		}
		if math.Hypot(s.X, s.Z-0.012) <= 0.002 {
			inside++
		}
	}
	if targets != 2 || inside != 0 {
		t.Errorf("%d targets of amplitude 50 (want 2), %d speckle scatterers inside the anechoic inclusion", targets, inside)
	}
	// the inclusion covers pi 2^2 / 64 of the region: about 20 % removed
	removed := nSpeckle - (len(cfg.Scatterers) - 2)
	if frac := float64(removed) / float64(nSpeckle); math.Abs(frac-math.Pi*4/64) > 0.03 {
		t.Errorf("inclusion removed %.3f of the speckle, want about %.3f", frac, math.Pi*4/64)
	}
	if !reflect.DeepEqual(truth.TargetsM, [][2]float64{{0, 0.02}, {0.001, 0.025}}) {
		t.Errorf("truth targets %v", truth.TargetsM)
	}
	// explicit screen values, in ns
	vals := make([]string, 32)
	for i := range vals {
		vals[i] = fmt.Sprint(i - 16)
	}
	y2 := strings.Replace(baseScenario, "phantom:", "screen: {values_ns: ["+strings.Join(vals, ", ")+"]}\nphantom:", 1)
	sc2, err := ParseScenario("v.yaml", []byte(y2))
	checkNoErr(t, err)
	cfg2, truth2, err := sc2.Build()
	checkNoErr(t, err)
	for i, v := range cfg2.Screen {
		if math.Abs(v-float64(i-16)*1e-9) > 1e-21 {
			t.Fatalf("screen value %d = %g s, want %g ns", i, v, float64(i-16))
		}
	}
	if truth2.Screen == nil || truth2.Screen.RMSS != 0 {
		t.Errorf("explicit screen truth %+v", truth2.Screen)
	}
}

// TestScenarioDoc keeps docs/scenario.md in agreement with the reader: its
// complete example parses and builds, and it names every key the reader
// knows.
func TestScenarioDoc(t *testing.T) {
	t.Parallel()
	b, err := os.ReadFile("../docs/scenario.md")
	checkNoErr(t, err)
	doc := string(b)
	_, rest, ok := strings.Cut(doc, "## A complete example")
	if !ok {
		t.Fatal("docs/scenario.md has no complete example")
	}
	_, rest, _ = strings.Cut(rest, "```yaml\n")
	example, _, ok := strings.Cut(rest, "```")
	if !ok {
		t.Fatal("the complete example has no YAML block")
	}
	sc, err := ParseScenario("scenario.md example", []byte(example))
	checkNoErr(t, err)
	cfg, truth, err := sc.Build()
	checkNoErr(t, err)
	checkNoErr(t, cfg.Validate())
	checkNoErr(t, truth.Validate(cfg.Probe.NumElements()))
	if len(cfg.Events) != 11 || len(truth.Layers) != 2 || truth.Screen == nil || len(truth.Inclusions) != 2 {
		t.Errorf("the example builds %d events, %d layers, screen %v, %d inclusions", len(cfg.Events), len(truth.Layers), truth.Screen != nil, len(truth.Inclusions))
	}
	keys := []string{"format", "description", "seed", "probe", "preset", "center_frequency_mhz", "fractional_bandwidth",
		"element_width_mm", "count", "pitch_mm", "radius_mm", "sampling_rate_mhz", "assumed_speed_mps", "depth_mm",
		"transmit", "plane_waves", "angles_deg", "max_angle_deg", "diverging", "sources_mm", "span_mm", "focused",
		"lines", "fnumber", "synthetic_aperture", "medium", "speed_mps", "water_temperature_c", "layers", "thickness_mm",
		"attenuation_db_cm_mhz", "screen", "values_ns", "rms_ns", "correlation_length_mm", "phantom", "speckle",
		"region_mm", "density", "targets", "positions_mm", "amplitude", "inclusions", "center_mm", "contrast_db",
		"noise", "snr_db", "output", "kind", ScenarioFormatV1}
	for _, k := range keys {
		if !strings.Contains(doc, "`"+k) {
			t.Errorf("docs/scenario.md does not document %q", k)
		}
	}
	for _, name := range PresetNames() {
		if !strings.Contains(doc, "`"+name+"`") {
			t.Errorf("docs/scenario.md does not list preset %q", name)
		}
	}
}
