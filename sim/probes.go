package sim

import (
	"fmt"
	"sort"
	"strings"

	"celerity/acq"
)

// Probe presets of our own naming.
var presets = map[string]acq.Probe{
	// A 128-element linear array at 5 MHz with 0.3 mm pitch.
	"linear-128": {Geometry: acq.Linear, Count: 128, PitchM: 0.3e-3, CenterFrequencyHz: 5e6,
		FractionalBandwidth: 0.7, ElementWidthM: 0.27e-3},
	// A 64-element phased array at 2.5 MHz with half-wavelength pitch (0.3 mm).
	"phased-64": {Geometry: acq.Linear, Count: 64, PitchM: 0.3e-3, CenterFrequencyHz: 2.5e6,
		FractionalBandwidth: 0.6, ElementWidthM: 0.27e-3},
	// A 128-element convex array at 3.5 MHz, 0.5 mm pitch on a 60 mm radius.
	"convex-128": {Geometry: acq.Convex, Count: 128, PitchM: 0.5e-3, RadiusM: 0.06, CenterFrequencyHz: 3.5e6,
		FractionalBandwidth: 0.6, ElementWidthM: 0.45e-3},
}

// Preset returns the named probe preset.
func Preset(name string) (acq.Probe, error) {
	p, ok := presets[name]
	if !ok {
		return acq.Probe{}, fmt.Errorf("unknown probe preset %q (have %s)", name, strings.Join(PresetNames(), ", "))
	}
	return p, nil
}

// PresetNames lists the probe presets.
func PresetNames() []string {
	var out []string
	for k := range presets {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
