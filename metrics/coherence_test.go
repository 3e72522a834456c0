package metrics

import (
	"math"
	"math/rand/v2"
	"testing"
)

func cnorm(r *rand.Rand) complex128 { return complex(r.NormFloat64(), r.NormFloat64()) }

// vczSpeckle draws focused channel data of diffuse scatterers at the transmit
// focus: channel i is the sum of N consecutive independent complex Gaussians,
// s_ik = sum_{j=i}^{i+N-1} u_jk, so channels at lag m share N - m terms and
// correlate as 1 - m/N, the autocorrelation of a uniform aperture of N
// elements (van Cittert-Zernike theorem in pulse-echo, Mallart & Fink, JASA
// 90(5), 1991). Each of the K kernel samples is an independent realization.
func vczSpeckle(r *rand.Rand, n, k int) [][]complex128 {
	ch := make([][]complex128, n)
	for i := range ch {
		ch[i] = make([]complex128, k)
	}
	u := make([]complex128, 2*n-1)
	for s := range k {
		for j := range u {
			u[j] = cnorm(r)
		}
		var run complex128
		for j := range n {
			run += u[j]
		}
		for i := range n {
			ch[i][s] = run
			if i+1 < n {
				run += u[i+n] - u[i]
			}
		}
	}
	return ch
}

func TestCoherenceSpeckle(t *testing.T) {
	t.Parallel()
	// K = 20 000 realizations: the CF ratio has a relative standard error of
	// about 1/sqrt(K) = 0.7 % (0.005); the lag-one estimate averages 63
	// pairs of 20 000 samples and is much tighter.
	const (
		cfTol  = 0.02
		locTol = 0.005
	)
	const n, k = 64, 20000
	r := rand.New(rand.NewPCG(1, 2))
	ch := vczSpeckle(r, n, k)
	// Derived from the triangle 1 - |m|/N: E|sum_i s_i|^2 / (N E sum_i |s_i|^2)
	// = (1/N^3) sum_{|m|<N} (N - |m|)^2 = 2/3 + 1/(3 N^2); 2/3 for large N
	// (CHECKS.md: derived; also Mallart & Fink, JASA 96(6), 1994).
	wantCF := 2.0/3 + 1/(3.0*n*n)
	if got := CoherenceFactor(ch); math.Abs(got-wantCF) > cfTol {
		t.Errorf("CoherenceFactor(speckle at focus) = %.4f, want %.4f (derived, triangle aperture autocorrelation)", got, wantCF)
	} else {
		t.Logf("CF %.4f, derived %.4f", got, wantCF)
	}
	// Lag m: 1 - m/N (CHECKS.md: Mallart & Fink, JASA 90(5), 1991).
	for _, m := range []int{1, 5, 16} {
		want := 1 - float64(m)/n
		if got := SpatialCoherence(ch, m); math.Abs(got-want) > locTol {
			t.Errorf("SpatialCoherence(lag %d) = %.4f, want %.4f (van Cittert-Zernike, 1 - m/N)", m, got, want)
		}
	}
}

func TestCoherenceLimits(t *testing.T) {
	t.Parallel()
	r := rand.New(rand.NewPCG(1, 2))
	const n, k = 32, 4000
	same := make([][]complex128, n)
	indep := make([][]complex128, n)
	common := make([]complex128, k)
	for s := range common {
		common[s] = cnorm(r)
	}
	for i := range n {
		same[i] = common
		indep[i] = make([]complex128, k)
		for s := range indep[i] {
			indep[i][s] = cnorm(r)
		}
	}
	// Independent channels: E|sum|^2 = N E|s|^2, so CF = 1/N (derived), and
	// zero coherence at any lag; standard errors 1/sqrt(K) = 1.6 % and
	// 1/sqrt(K (N-1)) = 0.3 %.
	tests := []struct {
		name      string
		got, want float64
		tol       float64
	}{
		{"CF identical", CoherenceFactor(same), 1, 1e-12},
		{"LOC identical", LagOneCoherence(same), 1, 1e-12},
		{"CF independent", CoherenceFactor(indep), 1.0 / n, 0.05 / n},
		{"LOC independent", LagOneCoherence(indep), 0, 0.01},
		{"CF zero", CoherenceFactor([][]complex128{{0}, {0}}), math.NaN(), 0},
		{"LOC one channel", LagOneCoherence([][]complex128{{1}}), math.NaN(), 0},
	}
	for _, tc := range tests {
		if math.IsNaN(tc.want) {
			if !math.IsNaN(tc.got) {
				t.Errorf("%s = %g, want NaN", tc.name, tc.got)
			}
			continue
		}
		if math.Abs(tc.got-tc.want) > tc.tol {
			t.Errorf("%s = %.5f, want %.5f (derived)", tc.name, tc.got, tc.want)
		}
	}
}

func TestLagOneCoherenceSNR(t *testing.T) {
	t.Parallel()
	// Identical signal on every channel plus independent noise of amplitude
	// ratio SNR: LOC = SNR^2 / (1 + SNR^2), i.e. SNR = sqrt(LOC / (1 - LOC))
	// (Long et al., IEEE TUFFC 65(10), 2018, from memory; also derived: the
	// normalized correlation of s + n1 and s + n2).
	const snrRelTol = 0.03 // 63 pairs of 4000 samples: LOC known to about 0.002
	const n, k = 64, 4000
	r := rand.New(rand.NewPCG(1, 2))
	for _, snr := range []float64{0.5, 1, 3} {
		sig := make([]complex128, k)
		for s := range sig {
			sig[s] = cnorm(r)
		}
		ch := make([][]complex128, n)
		for i := range ch {
			ch[i] = make([]complex128, k)
			for s := range ch[i] {
				ch[i][s] = sig[s] + cnorm(r)/complex(snr, 0)
			}
		}
		loc := LagOneCoherence(ch)
		want := snr * snr / (1 + snr*snr)
		if got := ChannelSNR(loc); math.Abs(got-snr)/snr > snrRelTol {
			t.Errorf("SNR %g: LOC %.4f (want %.4f), ChannelSNR %.4f (Long et al. 2018, from memory)", snr, loc, want, got)
		}
	}
	for _, bad := range []float64{-0.1, 1, math.NaN()} {
		if got := ChannelSNR(bad); !math.IsNaN(got) {
			t.Errorf("ChannelSNR(%g) = %g, want NaN", bad, got)
		}
	}
}
