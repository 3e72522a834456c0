package sim

import (
	"math/rand/v2"
	"testing"
)

// TestDepositVector: where the vector deposit runs (AVX2), depositFast gives
// the same records as the scalar loop, bit for bit, for every run length,
// with impulses in the same and in neighbouring bins (deposited in order).
func TestDepositVector(t *testing.T) {
	if !haveVector {
		t.Skip("no vector deposit on this machine")
	}
	rng := rand.New(rand.NewPCG(5, 6))
	const nb = 200
	for n := 0; n <= 41; n++ {
		gT := make([]float32, n)
		gA := make([]complex64, n)
		for g := range n {
			switch g % 5 {
			case 1:
				gT[g] = gT[g-1] // the same instant
			case 2:
				gT[g] = gT[g-1] + 0.6 // the next bin
			default:
				gT[g] = float32(rng.Float64() * (nb - 30))
			}
			gA[g] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		}
		pj := complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		base := float32(rng.Float64() * 20)
		vec, sca := make([]complex64, nb), make([]complex64, nb)
		for k := range vec {
			vec[k] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
			sca[k] = vec[k]
		}
		depositFast(vec, gT, gA, base, pj)
		haveVector = false
		depositFast(sca, gT, gA, base, pj)
		haveVector = true
		for k := range vec {
			if vec[k] != sca[k] {
				t.Fatalf("n %d, bin %d: vector %v, scalar %v", n, k, vec[k], sca[k])
			}
		}
	}
}
