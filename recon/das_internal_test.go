package recon

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestKernelLinearPair: the two-element kernel gives the same sums as two
// calls of kernelLinear (bit for bit where the compiler fuses neither;
// the check allows float32 rounding), including samples outside the record.
func TestKernelLinearPair(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	const ns, n = 300, 64
	rowA, rowB := make([]complex64, ns), make([]complex64, ns-7)
	for i := range rowA {
		rowA[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	for i := range rowB {
		rowB[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	tx, rxA, rxB := make([]float32, n), make([]float32, n), make([]float32, n)
	wA, wB := make([]complex64, n), make([]complex64, n)
	one, two := make([]complex64, n), make([]complex64, n)
	for k := range tx {
		tx[k] = float32(rng.Float64()*(ns+40) - 20) // some before and after the record
		rxA[k] = float32(rng.Float64() * 10)
		rxB[k] = float32(rng.Float64() * 10)
		wA[k] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		wB[k] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		one[k] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		two[k] = one[k]
	}
	tx[0], tx[1], tx[2] = float32(math.NaN()), -0.5, float32(ns-1) // rejected, before, at the last sample
	kernelLinear(one, rowA, tx, rxA, wA)
	kernelLinear(one, rowB, tx, rxB, wB)
	kernelLinearPair(two, rowA, rowB, tx, rxA, rxB, wA, wB)
	for k := range one {
		d := one[k] - two[k]
		if math.Hypot(float64(real(d)), float64(imag(d))) > 1e-6*(1+math.Hypot(float64(real(one[k])), float64(imag(one[k])))) {
			t.Fatalf("pixel %d: two calls %v, pair %v", k, one[k], two[k])
		}
	}
}

// TestKernelLinearVector: where the vector kernel runs (AVX2), kernelLinear
// gives the same sums as the scalar loop, bit for bit (the vector code does
// the scalar arithmetic in the same order, without fused multiply-adds),
// for every run length, with delays before, inside and after the record,
// NaN, and the last usable sample.
func TestKernelLinearVector(t *testing.T) {
	if !haveVector {
		t.Skip("no vector kernel on this machine")
	}
	rng := rand.New(rand.NewPCG(3, 4))
	const ns = 300
	row := make([]complex64, ns)
	for i := range row {
		row[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	for n := 0; n <= 37; n++ {
		tx, rx := make([]float32, n), make([]float32, n)
		w := make([]complex64, n)
		vec, sca := make([]complex64, n), make([]complex64, n)
		for k := range n {
			tx[k] = float32(rng.Float64()*(ns+40) - 20)
			rx[k] = float32(rng.Float64() * 10)
			w[k] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
			vec[k] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
			sca[k] = vec[k]
		}
		special := []float32{float32(math.NaN()), -0.5, float32(ns - 1), float32(ns-1) - 1e-3, 0, float32(math.Inf(1)), -1e9}
		for k := range min(n, len(special)) {
			tx[k], rx[k] = special[k], 0
		}
		kernelLinear(vec, row, tx, rx, w)
		haveVector = false
		kernelLinear(sca, row, tx, rx, w)
		haveVector = true
		for k := range n {
			if vec[k] != sca[k] {
				t.Fatalf("n %d, pixel %d (s = %g): vector %v, scalar %v", n, k, tx[k]+rx[k], vec[k], sca[k])
			}
		}
	}
}
