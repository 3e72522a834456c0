package metrics

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestSpeedError(t *testing.T) {
	t.Parallel()
	if got := SpeedError(1545, 1540); got != 5 {
		t.Fatalf("SpeedError(1545, 1540) = %g, want 5", got)
	}
}

// elementX returns the centres of n elements at pitch p, centred on x = 0.
func elementX(n int, p float64) []float64 {
	return axis(-float64(n-1)/2*p, p, n)
}

// aberrator draws a smooth arrival-time profile (s): white noise smoothed by a
// running mean over w elements, scaled to rms sigma.
func aberrator(r *rand.Rand, n, w int, sigma float64) []float64 {
	raw := make([]float64, n+w)
	for i := range raw {
		raw[i] = r.NormFloat64()
	}
	p := make([]float64, n)
	var ss float64
	for i := range p {
		for k := range w {
			p[i] += raw[i+k]
		}
		ss += p[i] * p[i]
	}
	scale := sigma / math.Sqrt(ss/float64(n))
	for i := range p {
		p[i] *= scale
	}
	return p
}

func TestDetrend(t *testing.T) {
	t.Parallel()
	const tol = 1e-20 // s; rounding of ns-scale sums
	x := elementX(128, 0.3e-3)
	// A pure offset and tilt leave no residual and are recovered exactly
	// (derived: least squares reproduces a line).
	p := make([]float64, len(x))
	for i := range p {
		p[i] = 40e-9 + 2e-6*x[i] // 40 ns and 2 us/m (a 0.17 degree steer at 1540 m/s)
	}
	res, mean, slope := Detrend(p, x)
	if math.Abs(mean-40e-9) > tol || math.Abs(slope-2e-6) > 1e-15 {
		t.Errorf("Detrend: mean %g, slope %g; want 4e-08, 2e-06", mean, slope)
	}
	for i, v := range res {
		if math.Abs(v) > tol {
			t.Fatalf("residual[%d] = %g, want 0", i, v)
		}
	}
	// Residuals have zero mean and no correlation with x (normal equations).
	r := rand.New(rand.NewPCG(1, 2))
	res, _, _ = Detrend(aberrator(r, len(x), 8, 25e-9), x)
	var s0, s1 float64
	for i, v := range res {
		s0 += v
		s1 += v * x[i]
	}
	if math.Abs(s0) > 1e-18 || math.Abs(s1) > 1e-21 {
		t.Errorf("residual sum %g, sum x*res %g; want 0", s0, s1)
	}
	// Degenerate positions: slope 0.
	if _, m, sl := Detrend([]float64{1, 3}, []float64{0, 0}); m != 2 || sl != 0 {
		t.Errorf("Detrend at one position: mean %g, slope %g; want 2, 0", m, sl)
	}
}

func TestProfileError(t *testing.T) {
	t.Parallel()
	// Tolerances: rounding of sums of ~1e-8 s values over 128 elements.
	const (
		rmsTol  = 1e-20 // s
		corrTol = 1e-12
	)
	x := elementX(128, 0.3e-3)
	r := rand.New(rand.NewPCG(1, 2))
	truth := aberrator(r, len(x), 8, 25e-9) // 25 ns rms, smoothed over 8 elements
	noise := aberrator(r, len(x), 1, 5e-9)
	withTrend := make([]float64, len(x))
	scaled := make([]float64, len(x))
	noisy := make([]float64, len(x))
	negated := make([]float64, len(x))
	for i := range x {
		withTrend[i] = truth[i] + 100e-9 - 3e-6*x[i]
		scaled[i] = 2.5*truth[i] + 7e-9
		noisy[i] = truth[i] + noise[i]
		negated[i] = -truth[i]
	}
	truthRes, _, _ := Detrend(truth, x)
	noiseRes, _, _ := Detrend(noise, x)
	tests := []struct {
		name               string
		est                []float64
		wantRMS, wantCorr  float64
		rmsRelTol, corrTol float64
	}{
		// A constant delay and a tilt change nothing (derived: they are removed).
		{"mean and trend added", withTrend, 0, 1, 0, corrTol},
		// Scaling keeps the correlation at 1; rms is 1.5 times the truth's
		// residual rms (derived).
		{"scaled", scaled, 1.5 * rmsOf(truthRes), 1, 1e-12, corrTol},
		{"negated", negated, 2 * rmsOf(truthRes), -1, 1e-12, corrTol},
		// Added noise: the rms error is the noise's residual rms (derived).
		{"noisy", noisy, rmsOf(noiseRes), math.NaN(), 1e-12, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			rms, corr := ProfileError(tc.est, truth, x)
			if math.Abs(rms-tc.wantRMS) > rmsTol+tc.rmsRelTol*tc.wantRMS {
				t.Errorf("rms = %g s, want %g s", rms, tc.wantRMS)
			}
			if math.IsNaN(tc.wantCorr) {
				// 25 ns profile with 5 ns noise: correlation 25/sqrt(25^2+5^2) = 0.98
				// in expectation (derived); allow sampling spread.
				if corr < 0.95 || corr > 1 {
					t.Errorf("corr = %.4f, want about 0.98", corr)
				}
				return
			}
			if math.Abs(corr-tc.wantCorr) > tc.corrTol {
				t.Errorf("corr = %.15f, want %g", corr, tc.wantCorr)
			}
		})
	}
	if rms, corr := ProfileError(nil, nil, nil); !math.IsNaN(rms) || !math.IsNaN(corr) {
		t.Errorf("ProfileError(empty) = %g, %g; want NaN, NaN", rms, corr)
	}
}

func rmsOf(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s / float64(len(v)))
}

func TestTruthPanics(t *testing.T) {
	t.Parallel()
	for name, fn := range map[string]func(){
		"Detrend":      func() { Detrend([]float64{1}, nil) },
		"ProfileError": func() { ProfileError([]float64{1}, []float64{1, 2}, []float64{0}) },
		"PairsFromInclusions": func() {
			PairsFromInclusions([][2]float64{{0, 0}}, nil)
		},
	} {
		func() {
			defer func() {
				if r, _ := recover().(string); len(r) < 9 || r[:9] != "metrics: " {
					t.Errorf("%s: recovered %q, want a metrics panic", name, r)
				}
			}()
			fn()
		}()
	}
}

// TestRMS: the root mean square (definition), NaN for no values.
func TestRMS(t *testing.T) {
	if got := RMS([]float64{3, -4, 0, 0}); math.Abs(got-2.5) > 1e-15 {
		t.Errorf("RMS = %g, want 2.5", got)
	}
	if !math.IsNaN(RMS(nil)) {
		t.Error("RMS of nothing is not NaN")
	}
}
