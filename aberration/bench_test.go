package aberration_test

import (
	"testing"

	"celerity/aberration"
)

// BenchmarkEstimate times one profile estimate in the default configuration
// (beamsum, up to six rounds of correct / re-form / re-estimate, automatic
// patches) for a 128-element linear array behind a 30 ns, 3 mm screen in
// speckle: synthetic aperture (128 events) and 11 compounded plane waves.
// The target is at most 5 s per estimate. It reports the wall-clock and the
// CPU seconds per estimate (the second is less disturbed by other load on a
// shared machine; on an idle machine the wall time is about the CPU time
// over the number of cores, less the serial parts).
//
//	go test ./aberration -run '^$' -bench Estimate -benchtime 3x
func BenchmarkEstimate(b *testing.B) {
	for _, bc := range []struct {
		name string
		spec caseSpec
	}{
		{"synthetic-aperture", saSpeckle},
		{"plane-waves-11", pwSpeckle},
		{"plane-waves-11-fine", pwSpeckle},
	} {
		b.Run(bc.name, func(b *testing.B) {
			f := simulate(b, bc.spec)
			cfg := aberration.Config{Model: f.model()}
			if bc.name == "plane-waves-11-fine" {
				cfg.PixelM = 0.25e-3
			}
			c0 := cpuSeconds()
			for b.Loop() {
				if _, err := aberration.Estimate(f.a, f.ch, cfg); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/estimate")
			b.ReportMetric((cpuSeconds()-c0)/float64(b.N), "cpu-s/estimate")
		})
	}
}
