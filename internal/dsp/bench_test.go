package dsp

import (
	"fmt"
	"testing"
)

// Benchmarks report a domain rate next to ns/op and keep the plain reference
// kernel beside each fast one, so a speed-up is a ratio from one run:
//
//	go test -run '^$' -bench . ./internal/dsp

// perSecond reports count items per benchmark iteration as a rate.
func perSecond(b *testing.B, count int, unit string) {
	b.ReportMetric(float64(count)*float64(b.N)/b.Elapsed().Seconds(), unit)
}

func BenchmarkHilbert(b *testing.B) {
	for _, n := range []int{256, 1024, 2048, 4096} {
		rng := newRand()
		x64 := make([]float64, n)
		x32 := make([]float32, n)
		for i := range x64 {
			x64[i] = rng.NormFloat64()
			x32[i] = float32(x64[i])
		}
		h := NewHilbert(n)
		b.Run(fmt.Sprintf("n=%d/float32", n), func(b *testing.B) {
			dst := make([]complex64, n)
			for b.Loop() {
				h.Analytic(dst, x32)
			}
			perSecond(b, n, "samples/s")
		})
		b.Run(fmt.Sprintf("n=%d/float64", n), func(b *testing.B) {
			dst := make([]complex128, n)
			for b.Loop() {
				h.Analytic64(dst, x64)
			}
			perSecond(b, n, "samples/s")
		})
		// The textbook complex-FFT method at the same padded length.
		b.Run(fmt.Sprintf("n=%d/reference", n), func(b *testing.B) {
			r := newRefHilbert(h.transformedLen())
			dst := make([]complex128, n)
			for b.Loop() {
				r.analytic(dst, x64)
			}
			perSecond(b, n, "samples/s")
		})
	}
}

func BenchmarkInterp(b *testing.B) {
	const calls = 4096
	kernels := []struct {
		name string
		f    func([]complex64, float32) complex64
	}{
		{"Linear", nil}, // called directly below so that it inlines
		{"linearRef", linearRef},
		{"Cubic", Cubic},
		{"cubicRef", cubicRef},
	}
	// Signal lengths: one RF line of a shallow and of a deep acquisition, and
	// one larger than L2 cache, where the lookups miss.
	for _, n := range []int{2048, 8192, 1 << 20} {
		rng := newRand()
		x := make([]complex64, n)
		for i := range x {
			x[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		}
		// Sorted-ish indices, as along a delay-and-sum column: increasing
		// with jitter.
		ts := make([]float32, calls)
		for i := range ts {
			ts[i] = float32(1 + (float64(i)+rng.Float64())*float64(n-3)/calls)
		}
		for _, k := range kernels {
			b.Run(fmt.Sprintf("n=%d/%s", n, k.name), func(b *testing.B) {
				// Results go to a slice, as into a beamformer's focused
				// line, so no call waits for the previous one.
				out := make([]complex64, calls)
				if k.f == nil {
					for b.Loop() {
						for j, t := range ts {
							out[j] = Linear(x, t)
						}
					}
				} else {
					for b.Loop() {
						for j, t := range ts {
							out[j] = k.f(x, t)
						}
					}
				}
				b.ReportMetric(b.Elapsed().Seconds()*1e9/float64(b.N*calls), "ns/call")
				perSecond(b, calls, "samples/s")
			})
		}
	}
}

func BenchmarkXCorrLag(b *testing.B) {
	for _, n := range []int{64, 256} {
		for _, maxLag := range []int{4, 16} {
			a, c := delayedPulsesN(n, 1.3)
			b.Run(fmt.Sprintf("n=%d/maxLag=%d", n, maxLag), func(b *testing.B) {
				for b.Loop() {
					XCorrLag(a, c, maxLag)
				}
				perSecond(b, 1, "pairs/s")
			})
		}
		a, c := delayedPulsesN(n, 0.3)
		b.Run(fmt.Sprintf("n=%d/PhaseLag", n), func(b *testing.B) {
			for b.Loop() {
				PhaseLag(a, c, 0.6)
			}
			perSecond(b, 1, "pairs/s")
		})
	}
}

// delayedPulsesN returns n-sample windows of delayedPulses' signals, centred
// on the pulse.
func delayedPulsesN(n int, d float64) (a, b []complex64) {
	a, b = delayedPulses(d)
	lo := max(int(pulseAt)-n/2, 0)
	hi := min(lo+n, len(a))
	return a[lo:hi], b[lo:hi]
}

func BenchmarkEnvelopeLogCompress(b *testing.B) {
	for _, n := range []int{256 * 256, 1024 * 1024} { // pixels in an image
		rng := newRand()
		x := make([]complex64, n)
		for i := range x {
			x[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		}
		env := make([]float32, n)
		db := make([]float32, n)
		b.Run(fmt.Sprintf("px=%d", n), func(b *testing.B) {
			for b.Loop() {
				Envelope(env, x)
				LogCompress(db, env, 0, 60)
			}
			perSecond(b, n, "px/s")
		})
	}
}
