package acq_test

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"

	"celerity/acq"
)

// Save a steered plane-wave acquisition and read it back; the firing delays,
// not the labels, tell which wave the scanner launched.
func ExampleSave() {
	parent, _ := os.MkdirTemp("", "example")
	defer os.RemoveAll(parent)
	dir := filepath.Join(parent, "my-scan")

	p := acq.NewLinear(128, 0.3e-3, 5e6)
	a := &acq.Acquisition{
		Probe:           p,
		SamplingRateHz:  20e6,
		AssumedSpeedMPS: 1540,
		Kind:            acq.RF,
		Events:          acq.PlaneWaveSequence(&p, []float64{-10, 0, 10}, 1540),
		NumSamples:      2000,
	}
	a.RF = make([]float32, 3*128*2000)
	if err := acq.Save(dir, a, &acq.Truth{SpeedMPS: 1480}, false); err != nil {
		fmt.Println(err)
		return
	}
	b, err := acq.Load(dir)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(b.Shape(), b.Kind, b.Events[2].Label)
	// The wave the same delays launch in a 1480 m/s medium.
	w := acq.DeriveWavefront(b.Probe.Elements(), &b.Events[2], 1480, 0, b.Probe.CenterFrequencyHz)
	fmt.Printf("%v (sin = %.4f)\n", w, math.Sin(w.Theta))
	// Output:
	// [3 128 2000] rf plane wave 10 deg
	// plane wave 9.61 deg (sin = 0.1669)
}

func ExampleLoad_error() {
	// An acquisition folder whose manifest has a typo in a key.
	dir, _ := os.MkdirTemp("", "scan")
	defer os.RemoveAll(dir)
	os.WriteFile(filepath.Join(dir, "acquisition.yaml"), []byte(strings.Replace(fixtureManifest, "pitch_m", "pitch_mm", 1)), 0o644)
	_, err := acq.Load(dir)
	fmt.Println(strings.TrimPrefix(err.Error(), dir+string(filepath.Separator)))
	// Output: acquisition.yaml: probe.linear.pitch_m: required key is missing (line 8)
}
