package aberration

import (
	"testing"

	"celerity/acq"
	"celerity/sim"
)

// TestSubApertureRule checks the sub-aperture chosen for compounded waves
// against the van Cittert-Zernike coherence length of the compounded
// transmit's main lobe, z (sin a_max - sin a_min) (derived: the main lobe is
// lambda / (sin a_max - sin a_min) wide, and a source of width D at depth z
// is coherent over lambda z / D across the aperture; common practice).
func TestSubApertureRule(t *testing.T) {
	p, err := sim.Preset("linear-128") // 0.3 mm pitch
	if err != nil {
		t.Fatal(err)
	}
	c := 1540.0
	mk := func(ev []acq.Event) *acq.Acquisition {
		return &acq.Acquisition{Probe: p, AssumedSpeedMPS: c, Events: ev}
	}
	at := func(z float64) []Patch {
		return []Patch{{X0: -5e-3, X1: 5e-3, Z0: z, Z1: z + 8e-3}, {X0: -5e-3, X1: 5e-3, Z0: z + 4e-3, Z1: z + 12e-3}}
	}
	x := make([]float64, p.Count)
	for i := range x {
		x[i] = (float64(i) - 63.5) * p.PitchM
	}
	for _, tc := range []struct {
		name    string
		a       *acq.Acquisition
		patches []Patch
		want    int
	}{
		// 16 mm * 2 sin 8 deg = 4.45 mm; a third is 1.48 mm, 4.95 pitches
		{"11 plane waves +/-8 deg at 16 mm", mk(acq.PlaneWaveSequence(&p, acq.SpreadAngles(11, 8), c)), at(16e-3), 5},
		// 8 mm: 2.23 mm, a third 0.74 mm, 2.5 pitches: 3
		{"11 plane waves +/-8 deg at 8 mm", mk(acq.PlaneWaveSequence(&p, acq.SpreadAngles(11, 8), c)), at(8e-3), 3},
		// 4 mm: 1.1 mm, 1.2 pitches: 1
		{"11 plane waves +/-8 deg at 4 mm", mk(acq.PlaneWaveSequence(&p, acq.SpreadAngles(11, 8), c)), at(4e-3), 1},
		// 30 mm * 2 sin 16 deg = 16.5 mm: capped at 1.5 mm, 5 pitches
		{"21 plane waves +/-16 deg at 30 mm", mk(acq.PlaneWaveSequence(&p, acq.SpreadAngles(21, 16), c)), at(30e-3), 5},
		{"synthetic aperture", mk(acq.SyntheticApertureSequence(&p)), at(16e-3), 1},
		{"two plane waves", mk(acq.PlaneWaveSequence(&p, []float64{-4, 4}, c)), at(16e-3), 1},
	} {
		if got := subApertureFor(tc.a, nil, tc.patches, x); got != tc.want {
			t.Errorf("%s: %d elements, want %d", tc.name, got, tc.want)
		}
	}
	// diverging waves from virtual sources 10 mm behind the array at -6, 0
	// and 6 mm: seen from (0, 16 mm), sin a = -/+ 6 / hypot(6, 26), so the
	// coherence length is 16 mm * 2 * 0.2247 = 7.19 mm, a third 2.40 mm:
	// capped, 5 pitches
	div := acq.DivergingSequence(&p, [][2]float64{{-6e-3, -10e-3}, {0, -10e-3}, {6e-3, -10e-3}}, c)
	if got := subApertureFor(mk(div), nil, at(16e-3), x); got != 5 {
		t.Errorf("diverging waves: %d elements, want 5", got)
	}
	// at 4 mm: 4 mm * 2 * 6 / hypot(6, 14) = 3.15 mm, a third 1.05 mm, 3.5
	// pitches, between the odd numbers 3 and 5: 3
	if got := subApertureFor(mk(div), nil, at(4e-3), x); got != 3 {
		t.Errorf("diverging waves at 4 mm: %d elements, want 3", got)
	}
}
