package dsp

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestPhasor(t *testing.T) {
	t.Parallel()
	// Reference: math.Sincos in float64 on the fractional cycle.
	const tol = 2e-7 // float32 rounding of values of magnitude 1
	rng := rand.New(rand.NewPCG(1, 2))
	for i := 0; i < 100000; i++ {
		c := (rng.Float64() - 0.5) * 1e4
		if i < 10 {
			c = float64(i) / 8
		}
		got := Phasor(c)
		s, co := math.Sincos(2 * math.Pi * (c - math.Floor(c)))
		if math.Abs(float64(real(got))-co) > tol || math.Abs(float64(imag(got))-s) > tol {
			t.Fatalf("Phasor(%g) = %v, want (%g, %g)", c, got, co, s)
		}
	}
}

func BenchmarkPhasor(b *testing.B) {
	x := 0.0
	var acc complex64
	for b.Loop() {
		acc += Phasor(x)
		x += 0.123456
	}
	_ = acc
}
