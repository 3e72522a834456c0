package acq_test

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"celerity/acq"
	"celerity/internal/atomicfile"
)

// roundTripCases builds the acquisitions of the round-trip tests: every
// geometry, both data kinds, with and without weights, labels of all kinds.
func roundTripCases() []struct {
	name        string
	a           *acq.Acquisition
	wantWeights bool // whether Save must write firing_weights.npy
} {
	rng := newRNG()
	type tc = struct {
		name        string
		a           *acq.Acquisition
		wantWeights bool
	}
	var out []tc

	// Linear, RF, plane waves, unit weights (no weights file), plane-wave labels.
	p := acq.NewLinear(32, 0.3e-3, 5e6)
	p.FractionalBandwidth = 0.7
	a := newAcq(rng, p, acq.RF, acq.PlaneWaveSequence(&p, acq.SpreadAngles(5, 10), 1540), 64)
	out = append(out, tc{"linear rf plane waves", a, false})

	// Convex, IQ, diverging waves, random apodization, virtual-source labels,
	// a description that needs escaping and a non-zero start time.
	p = acq.NewConvex(24, 0.5e-3, 0.06, 3.5e6)
	p.ElementWidthM = 0.45e-3
	p.FractionalBandwidth = 0.55
	evs := acq.DivergingSequence(&p, [][2]float64{{-0.004, -0.01}, {0, -0.02}, {0.003, -0.015}}, 1540)
	for i := range evs {
		for k := range evs[i].Weights {
			evs[i].Weights[k] = rng.Float64()
		}
	}
	a = newAcq(rng, p, acq.IQ, evs, 40)
	a.Description = "convex \"quoted\" text, tab\there, newline\nhere, backslash \\, unicode µs λ/2 ✓"
	a.StartTimeS = 2.5e-6
	a.DemodulationHz = 3.2e6
	a.SamplingRateHz = 7.5e6
	out = append(out, tc{"convex iq diverging weighted", a, true})

	// Explicit positions (jittered), RF, synthetic aperture: single-element
	// labels and a 0/1 weights file.
	pos := make([][2]float64, 16)
	for i := range pos {
		pos[i] = [2]float64{(float64(i)-7.5)*0.2e-3 + 1e-6*rng.NormFloat64(), 1e-5 * rng.NormFloat64()}
	}
	p = acq.Probe{Geometry: acq.Explicit, Positions: pos, CenterFrequencyHz: 7.6e6}
	a = newAcq(rng, p, acq.RF, acq.SyntheticApertureSequence(&p), 32)
	a.Description = ""
	out = append(out, tc{"explicit rf synthetic aperture", a, true})

	// Linear, RF, focused sub-apertures without labels, negative start time,
	// another assumed speed.
	p = acq.NewLinear(20, 0.2e-3, 6e6)
	evs = acq.FocusedSequence(&p, []float64{-1e-3, 0, 1e-3}, 0.01, 2, 1480)
	for i := range evs {
		evs[i].Label = acq.Label{}
	}
	a = newAcq(rng, p, acq.RF, evs, 16)
	a.StartTimeS = -1e-6
	a.AssumedSpeedMPS = 1480
	out = append(out, tc{"linear rf focused unlabelled", a, true})

	// IQ with labels of all three kinds in one manifest, negative weights and
	// extreme sample values.
	p = acq.NewLinear(8, 0.3e-3, 5e6)
	els := p.Elements()
	w := []float64{1, -1, 1, -1, 1, -1, 1, -1}
	evs = []acq.Event{
		{Delays: acq.PlaneWaveDelays(els, 0.1, 1540), Weights: w, Label: acq.PlaneWaveLabel(-89.5)},
		{Delays: acq.DivergingDelays(els, 0, -0.01, 1540), Weights: acq.SyntheticApertureSequence(&p)[0].Weights, Label: acq.VirtualSourceLabel(math.Copysign(0, -1), 1e-300)},
		{Delays: make([]float64, 8), Weights: acq.SyntheticApertureSequence(&p)[7].Weights, Label: acq.SingleElementLabel(7)},
	}
	a = newAcq(rng, p, acq.IQ, evs, 4)
	a.IQ[0] = complex(float32(math.Copysign(0, -1)), math.SmallestNonzeroFloat32)
	a.IQ[1] = complex(math.MaxFloat32, -math.MaxFloat32)
	a.DemodulationHz = 0
	out = append(out, tc{"linear iq mixed labels", a, true})

	// RF with extreme sample values and a sub-normal delay.
	p = acq.NewLinear(3, 1e-4, 1e6)
	a = newAcq(rng, p, acq.RF, []acq.Event{{Delays: []float64{5e-324, 0, 9.999e-3}, Weights: []float64{1, 1, 1}}}, 1)
	a.RF = []float32{float32(math.Copysign(0, -1)), math.SmallestNonzeroFloat32, -math.MaxFloat32}
	out = append(out, tc{"rf extreme values", a, false})
	return out
}

func TestSaveLoadRoundTrip(t *testing.T) {
	t.Parallel()
	for _, tc := range roundTripCases() {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			if err := tc.a.Validate(); err != nil {
				t.Fatalf("test acquisition is invalid: %v", err)
			}
			dir := filepath.Join(t.TempDir(), "scan")
			if err := acq.Save(dir, tc.a, nil, false); err != nil {
				t.Fatal(err)
			}
			want := []string{"acquisition.yaml", "channels.npy", "firing_delays.npy"}
			if tc.wantWeights {
				want = append(want, "firing_weights.npy")
			}
			slices.Sort(want)
			if got := listDir(t, dir); !slices.Equal(got, want) {
				t.Errorf("folder holds %v, want %v", got, want)
			}
			got, err := acq.Load(dir)
			if err != nil {
				t.Fatal(err)
			}
			compareAcq(t, tc.a, got)
			if err := got.Validate(); err != nil {
				t.Errorf("loaded acquisition fails Validate: %v", err)
			}

			// HeaderOnly reads everything but the samples.
			h, err := acq.LoadWith(dir, acq.LoadOptions{HeaderOnly: true})
			if err != nil {
				t.Fatal(err)
			}
			if h.Shape() != tc.a.Shape() || h.RF != nil || h.IQ != nil {
				t.Errorf("HeaderOnly: shape %v (want %v), %d RF, %d IQ samples", h.Shape(), tc.a.Shape(), len(h.RF), len(h.IQ))
			}
		})
	}
}

func TestLoadFixture(t *testing.T) {
	t.Parallel()
	for _, iq := range []bool{false, true} {
		dir := t.TempDir()
		writeFixture(t, dir, iq)
		a, err := acq.Load(dir)
		if err != nil {
			t.Fatalf("iq=%v: %v", iq, err)
		}
		if a.Shape() != [3]int{fixE, fixN, fixS} {
			t.Errorf("shape %v", a.Shape())
		}
		if got := a.Events[1].Weights; !slices.Equal(got, []float64{0.5, 1, 1, 0.5}) {
			t.Errorf("weights %v", got)
		}
		if iq && (a.Kind != acq.IQ || a.DemodulationHz != 5e6 || len(a.IQ) != fixE*fixN*fixS) {
			t.Errorf("iq fixture: kind %v, fd %g, %d samples", a.Kind, a.DemodulationHz, len(a.IQ))
		}
		if a.Events[0].Label.String() != "plane wave -10 deg" || a.Events[1].Label.String() != "virtual source (0, -20) mm" {
			t.Errorf("labels %q, %q", a.Events[0].Label, a.Events[1].Label)
		}
	}
}

func TestSaveOverwrite(t *testing.T) {
	t.Parallel()
	cases := roundTripCases()
	first, second := cases[0].a, cases[1].a

	t.Run("refuses without force and leaves the folder untouched", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		dir := filepath.Join(parent, "scan")
		if err := acq.Save(dir, first, nil, false); err != nil {
			t.Fatal(err)
		}
		before := snapshot(t, dir)
		err := acq.Save(dir, second, nil, false)
		if !errors.Is(err, atomicfile.ErrExists) {
			t.Fatalf("second save without force: got %v, want ErrExists", err)
		}
		if !strings.Contains(err.Error(), dir) {
			t.Errorf("error %q does not name the folder", err)
		}
		if after := snapshot(t, dir); !mapsEqual(before, after) {
			t.Error("the existing folder changed")
		}
		if got := listDir(t, parent); !slices.Equal(got, []string{"scan"}) {
			t.Errorf("parent holds %v, want only scan", got)
		}
	})

	t.Run("replaces with force", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		dir := filepath.Join(parent, "scan")
		if err := acq.Save(dir, first, nil, false); err != nil {
			t.Fatal(err)
		}
		// A stray file in the old folder must not survive the replacement.
		writeFile(t, filepath.Join(dir, "stray.txt"), []byte("old"))
		if err := acq.Save(dir, second, nil, true); err != nil {
			t.Fatal(err)
		}
		got, err := acq.Load(dir)
		if err != nil {
			t.Fatal(err)
		}
		compareAcq(t, second, got)
		if _, err := os.Stat(filepath.Join(dir, "stray.txt")); !os.IsNotExist(err) {
			t.Errorf("stray file of the old folder survived: %v", err)
		}
		if got := listDir(t, parent); !slices.Equal(got, []string{"scan"}) {
			t.Errorf("parent holds %v, want only scan", got)
		}
	})

	t.Run("a failed save leaves no folder", func(t *testing.T) {
		t.Parallel()
		bad := *first
		bad.RF = slices.Clone(first.RF)
		bad.RF[17] = float32(math.NaN())
		unlabelled := *first
		unlabelled.Events = slices.Clone(first.Events)
		unlabelled.Events[2].Label = acq.Label{}
		for _, c := range []struct {
			name string
			a    *acq.Acquisition
			want []string
		}{
			{"NaN sample", &bad, []string{"channels.file", "[0][0][17]", "not finite"}},
			{"mixed labels", &unlabelled, []string{"transmit.labels", "every event"}},
		} {
			parent := t.TempDir()
			dir := filepath.Join(parent, "scan")
			err := acq.Save(dir, c.a, nil, false)
			if err == nil {
				t.Fatalf("%s: save succeeded", c.name)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("%s: error %q does not contain %q", c.name, err, w)
				}
			}
			if got := listDir(t, parent); len(got) != 0 {
				t.Errorf("%s: parent holds %v after a failed save", c.name, got)
			}
			// With force over an existing folder, the old folder survives.
			if err := acq.Save(dir, second, nil, false); err != nil {
				t.Fatal(err)
			}
			before := snapshot(t, dir)
			if err := acq.Save(dir, c.a, nil, true); err == nil {
				t.Fatalf("%s: forced save succeeded", c.name)
			}
			if after := snapshot(t, dir); !mapsEqual(before, after) {
				t.Errorf("%s: a failed forced save changed the old folder", c.name)
			}
			if got := listDir(t, parent); !slices.Equal(got, []string{"scan"}) {
				t.Errorf("%s: parent holds %v", c.name, got)
			}
		}
	})

	t.Run("target is a file", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		dir := filepath.Join(parent, "scan")
		writeFile(t, dir, []byte("not a folder"))
		if err := acq.Save(dir, first, nil, true); err == nil {
			t.Fatal("save over a file succeeded")
		}
		if string(readFile(t, dir)) != "not a folder" {
			t.Error("the file was changed")
		}
	})
}

func mapsEqual(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if w, ok := b[k]; !ok || w != v {
			return false
		}
	}
	return true
}

// TestSaveRejectsWhatLoadRejects checks that Save never writes a folder that
// Load would refuse: labels outside the range Load accepts are caught on save.
func TestSaveRejectsWhatLoadRejects(t *testing.T) {
	t.Parallel()
	base := roundTripCases()[0].a
	two := acq.PlaneWaveLabel(5)
	two.SingleElement = new(int)
	for _, c := range []struct {
		name  string
		label acq.Label
		want  string
	}{
		{"plane wave at 90 deg", acq.PlaneWaveLabel(90), "transmit.labels[1].plane_wave_deg"},
		{"plane wave NaN", acq.PlaneWaveLabel(math.NaN()), "transmit.labels[1].plane_wave_deg"},
		{"virtual source Inf", acq.VirtualSourceLabel(0, math.Inf(-1)), "transmit.labels[1].virtual_source_m"},
		{"two kinds", two, "transmit.labels[1]"},
	} {
		a := *base
		a.Events = slices.Clone(base.Events)
		a.Events[1].Label = c.label
		dir := filepath.Join(t.TempDir(), "scan")
		err := acq.Save(dir, &a, nil, false)
		if err == nil {
			t.Errorf("%s: saved", c.name)
			if _, lerr := acq.Load(dir); lerr != nil {
				t.Errorf("%s: ...and Load refuses it: %v", c.name, lerr)
			}
			continue
		}
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %q does not contain %q", c.name, err, c.want)
		}
	}
}
