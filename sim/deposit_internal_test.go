package sim

import (
	"fmt"
	"math"
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

// BenchmarkDeposit: one scatterer's transmit train from a 128-element plane
// wave (arrival times 3 mm off axis at 20 mm depth, at 80 MHz), deposited on
// 128 rows, in the train's own order and interleaved with strides 2 to 4
// (the simulator uses interleaveStride). Reports ns per two-bin deposit.
func BenchmarkDeposit(b *testing.B) {
	var gT []float32
	var gA []complex64
	for t := range 128 {
		x := (float64(t) - 63.5) * 0.3e-3
		tt := math.Hypot(x-0.003, 0.02) / 1540 * 80e6
		gT = append(gT, float32(tt-1500))
		gA = append(gA, complex(float32(math.Cos(tt)), float32(math.Sin(tt))))
	}
	for _, stride := range []int{1, 2, 3, 4} {
		var sT []float32
		var sA []complex64
		for r := range stride {
			for g := r; g < len(gT); g += stride {
				sT = append(sT, gT[g])
				sA = append(sA, gA[g])
			}
		}
		b.Run(fmt.Sprintf("stride%d", stride), func(b *testing.B) {
			row := make([]complex64, 128*6000)
			for b.Loop() {
				for j := range 128 {
					depositFast(row[j*6000:(j+1)*6000], sT, sA, float32(1000+j%7), complex(1, 0.5))
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/128/float64(len(sT)), "ns/deposit")
		})
	}
}
