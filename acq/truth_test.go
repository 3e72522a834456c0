package acq_test

import (
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"

	"celerity/acq"
)

func f64p(v float64) *float64 { return &v }

func TestTruthRoundTrip(t *testing.T) {
	t.Parallel()
	rng := newRNG()
	base := roundTripCases()[0].a // 32 elements
	screen := make([]float64, base.NumElements())
	for i := range screen {
		screen[i] = 5e-8 * rng.NormFloat64()
	}
	for _, c := range []struct {
		name  string
		truth *acq.Truth
		files []string
	}{
		{"layers, screen, targets, inclusions, noise", &acq.Truth{
			Seed: math.MaxUint64, // seeds use the full uint64 range
			Layers: []acq.Layer{
				{ThicknessM: 0.015, SpeedMPS: 1450},
				{ThicknessM: 0.004, SpeedMPS: 1600},
				{SpeedMPS: 1570},
			},
			Screen:                &acq.Screen{DelaysS: screen, RMSS: 5e-8, CorrelationLengthM: 0.004},
			TargetsM:              [][2]float64{{0, 0.03}, {0.005, 0.04}, {-0.0125, 0.0375}},
			Inclusions:            []acq.Inclusion{{CenterM: [2]float64{0, 0.035}, RadiusM: 0.004, ContrastDB: -100}, {CenterM: [2]float64{0.01, 0.02}, RadiusM: 0.002, ContrastDB: 6}},
			NoiseSNRDB:            f64p(-3.5),
			AttenuationDBPerCmMHz: 0.5,
			Description:           "two-layer phantom, \"quoted\", µ",
		}, []string{"truth.yaml", "truth_screen.npy"}},
		{"homogeneous, noise-free", &acq.Truth{Seed: 7, SpeedMPS: 1480}, []string{"truth.yaml"}},
		{"homogeneous, zero SNR, one target", &acq.Truth{SpeedMPS: 1540.25, NoiseSNRDB: f64p(0), TargetsM: [][2]float64{{0, 0.01}}}, []string{"truth.yaml"}},
		{"one layer", &acq.Truth{Seed: 1 << 40, Layers: []acq.Layer{{SpeedMPS: 1500}}}, []string{"truth.yaml"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			dir := filepath.Join(t.TempDir(), "scan")
			if err := acq.Save(dir, base, c.truth, false); err != nil {
				t.Fatal(err)
			}
			for _, f := range []string{"truth.yaml", "truth_screen.npy"} {
				_, err := os.Stat(filepath.Join(dir, f))
				if want := slices.Contains(c.files, f); want != (err == nil) {
					t.Errorf("%s present: %v, want %v", f, err == nil, want)
				}
			}
			got, err := acq.LoadTruth(dir)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(got, c.truth) {
				t.Errorf("truth read back\n got %+v\nwant %+v", got, c.truth)
			}
			if got.Screen != nil {
				for i, v := range got.Screen.DelaysS {
					if !sameF64(v, c.truth.Screen.DelaysS[i]) {
						t.Fatalf("screen[%d]: got %v, want %v", i, v, c.truth.Screen.DelaysS[i])
					}
				}
			}
			if err := got.Validate(base.NumElements()); err != nil {
				t.Error(err)
			}
			// The acquisition beside it is unchanged by the truth.
			a, err := acq.Load(dir)
			if err != nil {
				t.Fatal(err)
			}
			compareAcq(t, base, a)
		})
	}
}

func TestLoadTruthAbsent(t *testing.T) {
	t.Parallel()
	tr, err := acq.LoadTruth(t.TempDir())
	if tr != nil || err != nil {
		t.Errorf("LoadTruth of a folder without truth.yaml: %v, %v; want nil, nil", tr, err)
	}
}

func TestTruthSpeeds(t *testing.T) {
	t.Parallel()
	tr := &acq.Truth{Layers: []acq.Layer{{ThicknessM: 0.01, SpeedMPS: 1450}, {SpeedMPS: 1600}}}
	// Derived: vertical travel time through 10 mm at 1450 and 10 mm at 1600;
	// the mean speed is the harmonic mean 2 / (1/1450 + 1/1600).
	const tol = 1e-9 // m/s; a few float64 roundings
	for _, c := range []struct{ z, at, mean float64 }{
		{0.005, 1450, 1450},
		{0.02, 1600, 2 / (1/1450.0 + 1/1600.0)},
		{0.03, 1600, 0.03 / (0.01/1450 + 0.02/1600)},
	} {
		if got := tr.SpeedAt(c.z); got != c.at {
			t.Errorf("SpeedAt(%g) = %g, want %g", c.z, got, c.at)
		}
		if got := tr.MeanSpeed(c.z); math.Abs(got-c.mean) > tol {
			t.Errorf("MeanSpeed(%g) = %.12g, want %.12g", c.z, got, c.mean)
		}
	}
	h := &acq.Truth{SpeedMPS: 1480}
	if h.SpeedAt(0.05) != 1480 || h.MeanSpeed(0.05) != 1480 {
		t.Error("homogeneous medium: speed is not constant")
	}
}

// validTruth is a truth.yaml that reads; the error cases edit it.
const validTruth = `format: celerity.truth/1
seed: 7
layers:
  - {thickness_m: 0.015, speed_mps: 1450}
  - {speed_mps: 1570}
screen:
  file: truth_screen.npy
  rms_s: 5.0e-8
  correlation_length_m: 0.004
targets_m: [[0.0, 0.03], [0.005, 0.04]]
inclusions:
  - {center_m: [0.0, 0.035], radius_m: 0.004, contrast_db: -100}
noise_snr_db: 20
attenuation_db_cm_mhz: 0.5
`

func writeTruthFixture(t testing.TB, dir, text string) {
	t.Helper()
	writeFile(t, filepath.Join(dir, "truth.yaml"), []byte(text))
	writeFile(t, filepath.Join(dir, "truth_screen.npy"), f64Array([]int{fixN}, 1e-8, -2e-8, 0, 3e-8))
}

func TestLoadTruthValid(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	writeTruthFixture(t, dir, validTruth)
	tr, err := acq.LoadTruth(dir)
	if err != nil {
		t.Fatal(err)
	}
	want := &acq.Truth{
		Seed:                  7,
		Layers:                []acq.Layer{{ThicknessM: 0.015, SpeedMPS: 1450}, {SpeedMPS: 1570}},
		Screen:                &acq.Screen{DelaysS: []float64{1e-8, -2e-8, 0, 3e-8}, RMSS: 5e-8, CorrelationLengthM: 0.004},
		TargetsM:              [][2]float64{{0, 0.03}, {0.005, 0.04}},
		Inclusions:            []acq.Inclusion{{CenterM: [2]float64{0, 0.035}, RadiusM: 0.004, ContrastDB: -100}},
		NoiseSNRDB:            f64p(20),
		AttenuationDBPerCmMHz: 0.5,
	}
	if !reflect.DeepEqual(tr, want) {
		t.Errorf("got %+v\nwant %+v", tr, want)
	}
}

func TestLoadTruthErrors(t *testing.T) {
	t.Parallel()
	rep := func(old, new string) string {
		if strings.Count(validTruth, old) != 1 {
			panic("truth fixture does not hold " + old)
		}
		return strings.Replace(validTruth, old, new, 1)
	}
	for _, c := range []struct {
		name   string
		text   string
		screen []byte // replaces truth_screen.npy when not nil
		want   []string
	}{
		{name: "malformed", text: "format: [", want: []string{"truth.yaml", "not valid YAML"}},
		{name: "wrong format", text: rep("celerity.truth/1", "celerity.acquisition/1"), want: []string{"truth.yaml", "format", "unsupported"}},
		{name: "missing format", text: rep("format: celerity.truth/1\n", ""), want: []string{"truth.yaml", "format", "missing"}},
		{name: "both speed and layers", text: rep("seed: 7\n", "seed: 7\nspeed_mps: 1540\n"), want: []string{"truth.yaml", "exactly one of speed_mps and layers"}},
		{name: "neither speed nor layers", text: rep("layers:\n  - {thickness_m: 0.015, speed_mps: 1450}\n  - {speed_mps: 1570}\n", ""),
			want: []string{"truth.yaml", "exactly one of speed_mps and layers"}},
		{name: "no layers", text: rep("layers:\n  - {thickness_m: 0.015, speed_mps: 1450}\n  - {speed_mps: 1570}\n", "layers: []\n"), want: []string{"truth.yaml", "layers", "at least one"}},
		{name: "last layer with thickness", text: rep("{speed_mps: 1570}", "{thickness_m: 0.01, speed_mps: 1570}"), want: []string{"truth.yaml", "layers[1].thickness_m", "last layer"}},
		{name: "layer without thickness", text: rep("{thickness_m: 0.015, speed_mps: 1450}", "{speed_mps: 1450}"), want: []string{"truth.yaml", "layers[0].thickness_m", "missing"}},
		{name: "zero thickness", text: rep("thickness_m: 0.015", "thickness_m: 0"), want: []string{"truth.yaml", "layers[0].thickness_m", "positive"}},
		{name: "layer speed in km/s", text: rep("speed_mps: 1450", "speed_mps: 1.45"), want: []string{"truth.yaml", "layers[0].speed_mps", "between 100 and 10000"}},
		{name: "unknown layer key", text: rep("speed_mps: 1450}", "speed_mps: 1450, density: 1000}"), want: []string{"truth.yaml", "layers[0].density", "unknown key"}},
		{name: "unknown top key", text: validTruth + "speed_of_sound: 1540\n", want: []string{"truth.yaml", "speed_of_sound", "unknown key", "line 15"}},
		{name: "unknown screen key", text: rep("  rms_s: 5.0e-8\n", "  rms_s: 5.0e-8\n  rms_ns: 50\n"), want: []string{"truth.yaml", "screen.rms_ns", "unknown key"}},
		{name: "duplicate key", text: validTruth + "seed: 8\n", want: []string{"truth.yaml", "seed", "twice"}},
		{name: "negative seed", text: rep("seed: 7", "seed: -7"), want: []string{"truth.yaml", "seed", "negative"}},
		{name: "fractional seed", text: rep("seed: 7", "seed: 7.5"), want: []string{"truth.yaml", "seed", "whole number"}},
		{name: "seed beyond uint64", text: rep("seed: 7", "seed: 18446744073709551616"), want: []string{"truth.yaml", "seed"}},
		{name: "NaN noise", text: rep("noise_snr_db: 20", "noise_snr_db: .nan"), want: []string{"truth.yaml", "noise_snr_db", "finite"}},
		{name: "Inf target", text: rep("[0.005, 0.04]", "[0.005, .inf]"), want: []string{"truth.yaml", "targets_m[1][1]", "finite"}},
		{name: "target triple", text: rep("[0.005, 0.04]", "[0.005, 0.04, 0]"), want: []string{"truth.yaml", "targets_m[1]", "pair"}},
		{name: "inclusion without radius", text: rep("radius_m: 0.004, ", ""), want: []string{"truth.yaml", "inclusions[0].radius_m", "missing"}},
		{name: "inclusion negative radius", text: rep("radius_m: 0.004", "radius_m: -0.004"), want: []string{"truth.yaml", "inclusions[0].radius_m", "positive"}},
		{name: "negative attenuation", text: rep("attenuation_db_cm_mhz: 0.5", "attenuation_db_cm_mhz: -0.5"), want: []string{"truth.yaml", "attenuation_db_cm_mhz", "negative"}},
		{name: "negative screen rms", text: rep("rms_s: 5.0e-8", "rms_s: -5.0e-8"), want: []string{"truth.yaml", "screen", "rms_s"}},
		{name: "screen file escapes", text: rep("file: truth_screen.npy", "file: ../truth_screen.npy"), want: []string{"truth.yaml", "screen.file", "inside"}},
		{name: "screen file missing", text: rep("file: truth_screen.npy", "file: other.npy"), want: []string{"other.npy", "screen.file", "not found"}},
		{name: "screen is 2-D", text: validTruth, screen: f64Array([]int{2, 2}, 0, 0, 0, 0), want: []string{"truth_screen.npy", "screen.file", "1 dimensions"}},
		{name: "screen is float32", text: validTruth, screen: npyFile("<f4", false, []int{4}, f32Bytes(0, 0, 0, 0)), want: []string{"truth_screen.npy", "screen.file", "float64"}},
		{name: "screen has NaN", text: validTruth, screen: f64Array([]int{4}, 0, math.NaN(), 0, 0), want: []string{"truth_screen.npy", "screen.file", "not finite"}},
		{name: "screen of a millisecond", text: validTruth, screen: f64Array([]int{4}, 0, 1e-3, 0, 0), want: []string{"truth.yaml", "screen.file", "100 us"}},
		{name: "screen truncated", text: validTruth, screen: npyFile("<f8", false, []int{4}, f64Bytes(0, 0, 0)), want: []string{"truth_screen.npy", "screen.file", "truncated"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			dir := t.TempDir()
			writeTruthFixture(t, dir, c.text)
			if c.screen != nil {
				writeFile(t, filepath.Join(dir, "truth_screen.npy"), c.screen)
			}
			tr, err := acq.LoadTruth(dir)
			if err == nil {
				t.Fatalf("LoadTruth succeeded: %+v", tr)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}

// TestTruthValidate checks the rules Save applies before writing a truth.
func TestTruthValidate(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name  string
		truth acq.Truth
		n     int
		want  string // "" for valid
	}{
		{"homogeneous", acq.Truth{SpeedMPS: 1540}, 4, ""},
		{"no speed", acq.Truth{}, 4, "speed_mps"},
		{"speed and layers", acq.Truth{SpeedMPS: 1540, Layers: []acq.Layer{{SpeedMPS: 1500}}}, 4, "exactly one"},
		{"last layer thick", acq.Truth{Layers: []acq.Layer{{ThicknessM: 0.01, SpeedMPS: 1500}}}, 4, "layers[0].thickness_m"},
		{"screen length", acq.Truth{SpeedMPS: 1540, Screen: &acq.Screen{DelaysS: make([]float64, 3)}}, 4, "screen.file: 3 values for 4 elements"},
		{"NaN noise", acq.Truth{SpeedMPS: 1540, NoiseSNRDB: f64p(math.NaN())}, 4, "noise_snr_db"},
		{"Inf target", acq.Truth{SpeedMPS: 1540, TargetsM: [][2]float64{{0, math.Inf(1)}}}, 4, "targets_m[0]"},
		{"NaN inclusion centre", acq.Truth{SpeedMPS: 1540, Inclusions: []acq.Inclusion{{CenterM: [2]float64{math.NaN(), 0}, RadiusM: 1e-3}}}, 4, "inclusions[0].center_m"},
		{"Inf contrast", acq.Truth{SpeedMPS: 1540, Inclusions: []acq.Inclusion{{RadiusM: 1e-3, ContrastDB: math.Inf(-1)}}}, 4, "inclusions[0].contrast_db"},
		{"NaN screen rms", acq.Truth{SpeedMPS: 1540, Screen: &acq.Screen{DelaysS: make([]float64, 4), RMSS: math.NaN()}}, 4, "screen"},
		{"NaN attenuation", acq.Truth{SpeedMPS: 1540, AttenuationDBPerCmMHz: math.NaN()}, 4, "attenuation_db_cm_mhz"},
	} {
		err := c.truth.Validate(c.n)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.name, err)
		case c.want != "" && err == nil:
			t.Errorf("%s: valid, want an error about %s", c.name, c.want)
		case c.want != "" && !strings.Contains(err.Error(), c.want):
			t.Errorf("%s: error %q does not contain %q", c.name, err, c.want)
		}
	}
}

// TestSaveTruthScreenLength checks that Save refuses a screen that does not
// match the probe, and writes nothing.
func TestSaveTruthScreenLength(t *testing.T) {
	t.Parallel()
	parent := t.TempDir()
	a := roundTripCases()[0].a
	err := acq.Save(filepath.Join(parent, "scan"), a, &acq.Truth{SpeedMPS: 1540, Screen: &acq.Screen{DelaysS: make([]float64, 3)}}, false)
	if err == nil || !strings.Contains(err.Error(), "screen.file") {
		t.Errorf("got %v, want a screen.file error", err)
	}
	if got := listDir(t, parent); len(got) != 0 {
		t.Errorf("parent holds %v", got)
	}
}
