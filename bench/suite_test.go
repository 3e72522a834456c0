package bench

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// suiteText is a small valid suite; tests edit it.
const suiteText = `format: celerity.suite/1
description: "for tests"
base:
  probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 32, pitch_mm: 0.3}
  depth_mm: 16
  transmit:
    plane_waves: {count: 3, max_angle_deg: 6}
  medium: {speed_mps: 1540}
  phantom:
    speckle: {region_mm: [-4, 4, 4, 14], density: 5}
    targets: {positions_mm: [[0, 9]]}
grid:
  medium.speed_mps: [1480, 1540, 1580.0]
  screen: [~, {rms_ns: 20, correlation_length_mm: 2.5}]
seeds: [1, 2]
`

func TestParseSuiteCases(t *testing.T) {
	t.Parallel()
	s, err := ParseSuite("t.yaml", "t", []byte(suiteText))
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Cases) != 12 || len(s.Groups) != 6 || len(s.Axes) != 2 {
		t.Fatalf("%d cases, %d groups, %d axes; want 12, 6, 2", len(s.Cases), len(s.Groups), len(s.Axes))
	}
	// grid points in order, the last key varying fastest, then seeds
	want := []string{
		"medium.speed_mps=1480, screen=none",
		"medium.speed_mps=1480, screen={correlation_length_mm: 2.5, rms_ns: 20}",
		"medium.speed_mps=1540, screen=none",
	}
	for i, w := range want {
		if s.Groups[i] != w {
			t.Errorf("group %d = %q, want %q", i, s.Groups[i], w)
		}
	}
	c := s.Cases[3] // group 1, seed 2
	if c.GroupIndex != 1 || c.Seed != 2 || c.Values[1] != "{correlation_length_mm: 2.5, rms_ns: 20}" {
		t.Errorf("case 3: %+v", c)
	}
	if sc := c.Scenario; sc.Layers[0].SpeedMPS != 1480 || sc.ScreenRMSS != 20e-9 || sc.Seed != 2 {
		t.Errorf("case 3 scenario: speed %g, screen %g, seed %d", sc.Layers[0].SpeedMPS, sc.ScreenRMSS, sc.Seed)
	}
	if s.Cases[4].Scenario.ScreenRMSS != 0 || s.Cases[11].Scenario.Layers[0].SpeedMPS != 1580 {
		t.Error("variations not applied")
	}
	if s.Name != "t" || len(s.Builtins) != len(BuiltinNames()) {
		t.Errorf("name %q, builtins %v", s.Name, s.Builtins)
	}
	ids := map[string]bool{}
	for _, c := range s.Cases {
		if len(c.ID) != 16 || ids[c.ID] {
			t.Errorf("case ID %q repeated or malformed", c.ID)
		}
		ids[c.ID] = true
	}
}

// TestCaseIDsAreCanonical: the ID depends on what is simulated, not on how
// the file writes it (number forms, key order, description, comments), and
// changes with anything that changes the data.
func TestCaseIDsAreCanonical(t *testing.T) {
	t.Parallel()
	id := func(text string) string {
		t.Helper()
		s, err := ParseSuite("t.yaml", "t", []byte(text))
		if err != nil {
			t.Fatal(err)
		}
		return s.Cases[0].ID
	}
	base := id(suiteText)
	same := []string{
		strings.Replace(suiteText, "[1480, 1540", "[1.48e3, 1540", 1),
		strings.Replace(suiteText, "[1480, 1540", "[1480.0, 1540", 1),
		strings.Replace(suiteText, `description: "for tests"`, `description: "other words" # and a comment`, 1),
		strings.Replace(suiteText, "{center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 32, pitch_mm: 0.3}", "{count: 32, pitch_mm: 0.3, fractional_bandwidth: 0.7, center_frequency_mhz: 5}", 1),
		strings.Replace(suiteText, "  phantom:", "  output: ~\n  phantom:", 1),
		strings.Replace(suiteText, "  medium: {speed_mps: 1540}", "  medium: {speed_mps: 1500}", 1), // overridden by the grid
	}
	for i, text := range same {
		if got := id(text); got != base {
			t.Errorf("variant %d changed the case ID: %s, want %s", i, got, base)
		}
	}
	differ := []string{
		strings.Replace(suiteText, "[1480, 1540", "[1481, 1540", 1),
		strings.Replace(suiteText, "seeds: [1, 2]", "seeds: [5, 2]", 1),
		strings.Replace(suiteText, "density: 5", "density: 6", 1),
	}
	for i, text := range differ {
		if got := id(text); got == base {
			t.Errorf("change %d kept the case ID", i)
		}
	}
}

// TestSuiteErrors: every mistake is an error naming the file, the field and
// the line (strictyaml conventions).
func TestSuiteErrors(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name, old, new string
		want           []string
	}{
		{"unknown top-level key", "seeds: [1, 2]", "seeds: [1, 2]\nseed: 3", []string{"t.yaml: seed: unknown key (line 16)"}},
		{"unknown scenario key", "  depth_mm: 16", "  depth_mm: 16\n  depht_mm: 3", []string{"t.yaml: base.depht_mm: unknown key (line 6)"}},
		{"bad value in the grid", "[1480, 1540, 1580.0]", "[1480, 3000, 1580.0]", []string{"t.yaml: base.medium.speed_mps: must be between 1000 and 2500 m/s, got 3000 (line 13)", "case medium.speed_mps=3000"}},
		{"bad value in base", "pitch_mm: 0.3}", "pitch_mm: -0.3}", []string{"t.yaml: base.probe", "(line 4)"}},
		{"seed in base", "  depth_mm: 16", "  depth_mm: 16\n  seed: 4", []string{"t.yaml: base.seed: seeds come from the suite's seeds key (line 6)"}},
		{"grid key shape", "  screen: [~", "  Screen!: [~", []string{"t.yaml: grid.Screen!:", "(line 14)"}},
		{"grid on seed", "  screen: [~", "  seed: [~", []string{"t.yaml: grid.seed: seed cannot vary"}},
		{"grid not a list", "  screen: [~, {rms_ns: 20, correlation_length_mm: 2.5}]", "  screen: {rms_ns: 20}", []string{"t.yaml: grid.screen: expected a non-empty list", "(line 14)"}},
		{"repeated alternative", "[1480, 1540, 1580.0]", "[1480, 1540, 1.48e3]", []string{"t.yaml: grid.medium.speed_mps[2]: the same alternative as [0] (line 13)"}},
		{"missing list item", "  screen: [~", "  medium.layers[1].speed_mps: [1500]\n  screen: [~", []string{"t.yaml: grid.medium.layers[1].speed_mps: base has no list medium.layers (line 14)"}},
		{"repeated seed", "seeds: [1, 2]", "seeds: [1, 2, 1]", []string{"t.yaml: seeds[2]: seed 1 appears twice (line 15)"}},
		{"seeds mapping typo", "seeds: [1, 2]", "seeds: {count: 2, frist: 3}", []string{"t.yaml: seeds.frist: unknown key (line 15)"}},
		{"unknown estimator", "seeds: [1, 2]", "seeds: [1, 2]\nestimators: [speed-coherence-factor, speed-magic]", []string{`t.yaml: estimators[1]: unknown built-in estimator "speed-magic"`, "(line 16)"}},
		{"wrong format", "format: celerity.suite/1", "format: celerity.suite/2", []string{`t.yaml: format: unsupported format "celerity.suite/2"`}},
		{"no base", "base:", "bass:", []string{"t.yaml: base: required key is missing"}},
	} {
		text := strings.Replace(suiteText, c.old, c.new, 1)
		if text == suiteText {
			t.Fatalf("%s: the edit did not apply", c.name)
		}
		_, err := ParseSuite("t.yaml", "t", []byte(text))
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: error %q lacks %q", c.name, err, w)
			}
		}
	}
	// two grid points that make the same scenario
	dup := strings.Replace(suiteText, "  screen: [~, {rms_ns: 20, correlation_length_mm: 2.5}]", "  phantom.speckle.density: [5]\n  depth_mm: [16, 16.0e0]", 1)
	if _, err := ParseSuite("t.yaml", "t", []byte(dup)); err == nil || !strings.Contains(err.Error(), "same alternative") {
		t.Errorf("equal alternatives: %v", err)
	}
	// a later key that overrides an earlier one makes identical cases
	over := strings.Replace(suiteText, "  screen: [~", "  medium: [{speed_mps: 1500}]\n  screen: [~", 1)
	if _, err := ParseSuite("t.yaml", "t", []byte(over)); err == nil || !strings.Contains(err.Error(), "is the same scenario as case") {
		t.Errorf("overriding keys: %v", err)
	}
}

func TestSeedsAndEstimatorsKeys(t *testing.T) {
	t.Parallel()
	text := strings.Replace(suiteText, "seeds: [1, 2]", "seeds: {count: 3, first: 10}\nestimators: [aberration-pairs, speed-brightness]", 1)
	s, err := ParseSuite("t.yaml", "t", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Seeds) != 3 || s.Seeds[0] != 10 || s.Seeds[2] != 12 {
		t.Errorf("seeds %v", s.Seeds)
	}
	// canonical order, whatever the file's order
	if len(s.Builtins) != 2 || s.Builtins[0] != SpeedBrightness || s.Builtins[1] != AberrationPairs {
		t.Errorf("builtins %v", s.Builtins)
	}
	none := strings.Replace(suiteText, "seeds: [1, 2]", "estimators: []", 1)
	if s, err = ParseSuite("t.yaml", "t", []byte(none)); err != nil || len(s.Builtins) != 0 || len(s.Seeds) != 1 || s.Seeds[0] != 1 {
		t.Errorf("estimators: []: %v, builtins %v, seeds %v", err, s.Builtins, s.Seeds)
	}
	noGrid := strings.Replace(suiteText, "grid:\n  medium.speed_mps: [1480, 1540, 1580.0]\n  screen: [~, {rms_ns: 20, correlation_length_mm: 2.5}]\n", "", 1)
	if s, err = ParseSuite("t.yaml", "t", []byte(noGrid)); err != nil || len(s.Cases) != 2 || s.Groups[0] != "base" {
		t.Errorf("no grid: %v %+v", err, s)
	}
}

// TestShippedSuites parses the suites in testdata/suites.
func TestShippedSuites(t *testing.T) {
	t.Parallel()
	paths, _ := filepath.Glob(filepath.Join("..", "testdata", "suites", "*.yaml"))
	if len(paths) < 2 {
		t.Fatalf("found %d shipped suites, want quick and full", len(paths))
	}
	for _, p := range paths {
		s, err := LoadSuite(p)
		if err != nil {
			t.Errorf("%s: %v", p, err)
			continue
		}
		if s.Name+".yaml" != filepath.Base(p) || s.Description == "" {
			t.Errorf("%s: name %q, description %q", p, s.Name, s.Description)
		}
	}
	if _, err := os.Stat(filepath.Join("..", "testdata", "suites", "quick.yaml")); err != nil {
		t.Error(err)
	}
}

// TestDocsExampleSuite parses the example suite of docs/bench.md, so that
// the documentation stays a valid suite.
func TestDocsExampleSuite(t *testing.T) {
	t.Parallel()
	b, err := os.ReadFile(filepath.Join("..", "docs", "bench.md"))
	if err != nil {
		t.Fatal(err)
	}
	_, rest, ok := strings.Cut(string(b), "## Suite files")
	if !ok {
		t.Fatal("docs/bench.md has no suite section")
	}
	_, rest, ok = strings.Cut(rest, "```yaml\n")
	block, _, ok2 := strings.Cut(rest, "```")
	if !ok || !ok2 {
		t.Fatal("no yaml block in the suite section")
	}
	s, err := ParseSuite("bench.md", "example", []byte(block))
	if err != nil {
		t.Fatal(err)
	}
	// 3 speeds x 3 screens x 2 sequences x 5 seeds
	if len(s.Cases) != 90 || s.Name != "screens" || len(s.Builtins) != 2 {
		t.Errorf("%d cases, name %q, builtins %v", len(s.Cases), s.Name, s.Builtins)
	}
}
