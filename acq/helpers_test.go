package acq_test

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"celerity/acq"
)

// newRNG returns the seeded generator every test draws from.
func newRNG() *rand.Rand { return rand.New(rand.NewPCG(1, 2)) }

// newAcq returns an acquisition of the given probe, kind and events with
// random channel data of ns samples per channel.
func newAcq(rng *rand.Rand, p acq.Probe, kind acq.DataKind, events []acq.Event, ns int) *acq.Acquisition {
	a := &acq.Acquisition{
		Description:     "test acquisition",
		Probe:           p,
		SamplingRateHz:  20e6,
		AssumedSpeedMPS: 1540,
		Kind:            kind,
		Events:          events,
		NumSamples:      ns,
	}
	n := len(events) * p.NumElements() * ns
	switch kind {
	case acq.RF:
		a.RF = make([]float32, n)
		for i := range a.RF {
			a.RF[i] = float32(rng.NormFloat64())
		}
	case acq.IQ:
		a.DemodulationHz = p.CenterFrequencyHz
		a.IQ = make([]complex64, n)
		for i := range a.IQ {
			a.IQ[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		}
	}
	return a
}

func sameF64(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }
func sameF32(a, b float32) bool { return math.Float32bits(a) == math.Float32bits(b) }

// compareAcq reports every difference between want and got; floats are
// compared bit for bit, so -0 and 0 differ.
func compareAcq(t *testing.T, want, got *acq.Acquisition) {
	t.Helper()
	f := func(name string, w, g float64) {
		t.Helper()
		if !sameF64(w, g) {
			t.Errorf("%s: got %v, want %v", name, g, w)
		}
	}
	if got.Description != want.Description {
		t.Errorf("Description: got %q, want %q", got.Description, want.Description)
	}
	wp, gp := want.Probe, got.Probe
	f("CenterFrequencyHz", wp.CenterFrequencyHz, gp.CenterFrequencyHz)
	f("FractionalBandwidth", wp.FractionalBandwidth, gp.FractionalBandwidth)
	f("ElementWidthM", wp.ElementWidthM, gp.ElementWidthM)
	if gp.Geometry != wp.Geometry || gp.Count != wp.Count {
		t.Errorf("probe: got %v/%d, want %v/%d", gp.Geometry, gp.Count, wp.Geometry, wp.Count)
	}
	f("PitchM", wp.PitchM, gp.PitchM)
	f("RadiusM", wp.RadiusM, gp.RadiusM)
	if len(gp.Positions) != len(wp.Positions) {
		t.Errorf("Positions: got %d, want %d", len(gp.Positions), len(wp.Positions))
	} else {
		for i := range wp.Positions {
			f(fmt.Sprintf("Positions[%d][0]", i), wp.Positions[i][0], gp.Positions[i][0])
			f(fmt.Sprintf("Positions[%d][1]", i), wp.Positions[i][1], gp.Positions[i][1])
		}
	}
	f("SamplingRateHz", want.SamplingRateHz, got.SamplingRateHz)
	f("StartTimeS", want.StartTimeS, got.StartTimeS)
	f("AssumedSpeedMPS", want.AssumedSpeedMPS, got.AssumedSpeedMPS)
	f("DemodulationHz", want.DemodulationHz, got.DemodulationHz)
	if got.Kind != want.Kind || got.NumSamples != want.NumSamples {
		t.Errorf("kind/samples: got %v/%d, want %v/%d", got.Kind, got.NumSamples, want.Kind, want.NumSamples)
	}
	if len(got.Events) != len(want.Events) {
		t.Fatalf("events: got %d, want %d", len(got.Events), len(want.Events))
	}
	for i := range want.Events {
		we, ge := &want.Events[i], &got.Events[i]
		if len(ge.Delays) != len(we.Delays) || len(ge.Weights) != len(we.Weights) {
			t.Fatalf("event %d: sizes differ", i)
		}
		for k := range we.Delays {
			f(fmt.Sprintf("event %d delay %d", i, k), we.Delays[k], ge.Delays[k])
			f(fmt.Sprintf("event %d weight %d", i, k), we.Weights[k], ge.Weights[k])
		}
		if !sameLabel(we.Label, ge.Label) {
			t.Errorf("event %d label: got %q, want %q", i, ge.Label, we.Label)
		}
	}
	if len(got.RF) != len(want.RF) || len(got.IQ) != len(want.IQ) {
		t.Fatalf("samples: got %d RF %d IQ, want %d RF %d IQ", len(got.RF), len(got.IQ), len(want.RF), len(want.IQ))
	}
	for i := range want.RF {
		if !sameF32(want.RF[i], got.RF[i]) {
			t.Fatalf("RF[%d]: got %v, want %v", i, got.RF[i], want.RF[i])
		}
	}
	for i := range want.IQ {
		if !sameF32(real(want.IQ[i]), real(got.IQ[i])) || !sameF32(imag(want.IQ[i]), imag(got.IQ[i])) {
			t.Fatalf("IQ[%d]: got %v, want %v", i, got.IQ[i], want.IQ[i])
		}
	}
}

func sameLabel(a, b acq.Label) bool {
	switch {
	case a.PlaneWaveDeg != nil:
		return b.PlaneWaveDeg != nil && sameF64(*a.PlaneWaveDeg, *b.PlaneWaveDeg) && b.VirtualSourceM == nil && b.SingleElement == nil
	case a.VirtualSourceM != nil:
		return b.VirtualSourceM != nil && sameF64(a.VirtualSourceM[0], b.VirtualSourceM[0]) &&
			sameF64(a.VirtualSourceM[1], b.VirtualSourceM[1]) && b.PlaneWaveDeg == nil && b.SingleElement == nil
	case a.SingleElement != nil:
		return b.SingleElement != nil && *a.SingleElement == *b.SingleElement && b.PlaneWaveDeg == nil && b.VirtualSourceM == nil
	}
	return b.IsZero()
}

// npyFile returns a version 1.0 .npy file with an arbitrary descr, order and
// shape around data, laid out as NumPy writes it (header padded to 64 bytes).
func npyFile(descr string, fortran bool, shape []int, data []byte) []byte {
	dims := make([]string, len(shape))
	for i, s := range shape {
		dims[i] = fmt.Sprint(s)
	}
	sh := strings.Join(dims, ", ")
	if len(shape) == 1 {
		sh += ","
	}
	order := "False"
	if fortran {
		order = "True"
	}
	dict := fmt.Sprintf("{'descr': '%s', 'fortran_order': %s, 'shape': (%s), }", descr, order, sh)
	pad := (64 - (10+len(dict)+1)%64) % 64
	dict += strings.Repeat(" ", pad) + "\n"
	var b bytes.Buffer
	b.WriteString("\x93NUMPY\x01\x00")
	binary.Write(&b, binary.LittleEndian, uint16(len(dict)))
	b.WriteString(dict)
	b.Write(data)
	return b.Bytes()
}

func f32Bytes(v ...float32) []byte {
	b := make([]byte, 4*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(x))
	}
	return b
}

func f64Bytes(v ...float64) []byte {
	b := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
	}
	return b
}

func c64Bytes(v ...complex64) []byte {
	b := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint32(b[8*i:], math.Float32bits(real(x)))
		binary.LittleEndian.PutUint32(b[8*i+4:], math.Float32bits(imag(x)))
	}
	return b
}

func writeFile(t testing.TB, path string, b []byte) {
	t.Helper()
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

func readFile(t testing.TB, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// fixture sizes: E events, N elements, S samples.
const (
	fixE = 2
	fixN = 4
	fixS = 8
)

// fixtureManifest is a valid acquisition.yaml for the fixture arrays. Tests
// edit it by exact substring replacement.
const fixtureManifest = `format: celerity.acquisition/1
description: "error-case fixture"
probe:
  center_frequency_hz: 5.0e6
  fractional_bandwidth: 0.7
  element_width_m: 0.27e-3
  linear:
    count: 4
    pitch_m: 0.3e-3
sampling_rate_hz: 20.0e6
start_time_s: 0.0
assumed_speed_mps: 1540
channels:
  file: channels.npy
  kind: rf
transmit:
  delays_file: firing_delays.npy
  weights_file: firing_weights.npy
  labels:
    - {plane_wave_deg: -10}
    - {virtual_source_m: [0.0, -0.02]}
`

// fixtureIQ turns the fixture manifest into its IQ variant.
func fixtureIQ(m string) string {
	return strings.Replace(m, "  kind: rf\n", "  kind: iq\n  demodulation_frequency_hz: 5.0e6\n", 1)
}

// fixtureArrays returns the fixture's channels (RF or IQ), delays and weights
// files.
func fixtureArrays(iq bool) (channels, delays, weights []byte) {
	rng := newRNG()
	if iq {
		v := make([]complex64, fixE*fixN*fixS)
		for i := range v {
			v[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		}
		channels = npyFile("<c8", false, []int{fixE, fixN, fixS}, c64Bytes(v...))
	} else {
		v := make([]float32, fixE*fixN*fixS)
		for i := range v {
			v[i] = float32(rng.NormFloat64())
		}
		channels = npyFile("<f4", false, []int{fixE, fixN, fixS}, f32Bytes(v...))
	}
	p := acq.NewLinear(fixN, 0.3e-3, 5e6)
	els := p.Elements()
	d := append(acq.PlaneWaveDelays(els, -10*math.Pi/180, 1540), acq.DivergingDelays(els, 0, -0.02, 1540)...)
	delays = npyFile("<f8", false, []int{fixE, fixN}, f64Bytes(d...))
	weights = npyFile("<f8", false, []int{fixE, fixN}, f64Bytes(1, 1, 1, 1, 0.5, 1, 1, 0.5))
	return channels, delays, weights
}

// writeFixture writes the valid fixture folder into dir.
func writeFixture(t testing.TB, dir string, iq bool) {
	t.Helper()
	ch, d, w := fixtureArrays(iq)
	m := fixtureManifest
	if iq {
		m = fixtureIQ(m)
	}
	writeFile(t, filepath.Join(dir, "acquisition.yaml"), []byte(m))
	writeFile(t, filepath.Join(dir, "channels.npy"), ch)
	writeFile(t, filepath.Join(dir, "firing_delays.npy"), d)
	writeFile(t, filepath.Join(dir, "firing_weights.npy"), w)
}

// listDir returns the names in dir, sorted.
func listDir(t testing.TB, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range es {
		out = append(out, e.Name())
	}
	return out
}

// snapshot returns the name and content of every file under dir.
func snapshot(t testing.TB, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		out[strings.TrimPrefix(p, dir)] = string(b)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}
