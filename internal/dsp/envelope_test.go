package dsp

import (
	"math"
	"testing"
)

// dbTol allows for float32 rounding of levels of tens of dB.
const dbTol = 1e-5

func TestEnvelope(t *testing.T) {
	t.Parallel()
	x := []complex64{3 + 4i, 0, -1, 1e30 + 1e30i, 1e-30i}
	// |3+4i| = 5 (Pythagorean triple); 1e30 sqrt(2) would overflow a float32
	// square, so this checks the float64 intermediate; 1e-30 would underflow.
	want := []float32{5, 0, 1, float32(1e30 * math.Sqrt2), 1e-30}
	got := Envelope(nil, x)
	for i := range want {
		if math.Abs(float64(got[i]-want[i])) > 1e-6*float64(want[i]) {
			t.Errorf("Envelope[%d] = %g, want %g", i, got[i], want[i])
		}
	}
	dst := make([]float32, len(x))
	if out := Envelope(dst, x); &out[0] != &dst[0] {
		t.Error("Envelope did not write into dst")
	}
	if !panics(func() { Envelope(make([]float32, 2), x) }) {
		t.Error("Envelope with a short dst did not panic")
	}
}

func TestLogCompress(t *testing.T) {
	t.Parallel()
	nan := float32(math.NaN())
	cases := []struct {
		name string
		env  []float32
		ref  float32
		dr   float32
		want []float32
	}{
		// 20 log10 of powers of ten: 0, -20, -40, -100 -> clipped to -60.
		{"max ref", []float32{1, 0.1, 0.01, 0, 1e-5}, 0, 60, []float32{0, -20, -40, -60, -60}},
		// Given reference 10: everything 20 dB lower; above the reference
		// clips to 0.
		{"fixed ref", []float32{100, 10, 1, 0.001}, 10, 50, []float32{0, 0, -20, -50}},
		// 20 log10(0.5) = -6.0206 dB.
		{"half", []float32{2, 1}, -1, 40, []float32{0, -6.0206}},
		{"all zero", []float32{0, 0}, 0, 45, []float32{-45, -45}},
		{"NaN propagates", []float32{nan, 4, 2}, 0, 30, []float32{nan, 0, -6.0206}},
		{"empty", nil, 0, 60, []float32{}},
	}
	for _, tc := range cases {
		got := LogCompress(nil, tc.env, tc.ref, tc.dr)
		if len(got) != len(tc.want) {
			t.Fatalf("%s: length %d, want %d", tc.name, len(got), len(tc.want))
		}
		for i, w := range tc.want {
			g := got[i]
			if w != w {
				if g == g {
					t.Errorf("%s[%d] = %g, want NaN", tc.name, i, g)
				}
				continue
			}
			if math.Abs(float64(g-w)) > 1e-4 {
				t.Errorf("%s[%d] = %g, want %g", tc.name, i, g, w)
			}
		}
	}
	// In place, and a dense check against the formula.
	env := make([]float32, 1000)
	for i := range env {
		env[i] = float32(i) / 999
	}
	want := make([]float32, len(env))
	for i, e := range env {
		want[i] = float32(max(20*math.Log10(float64(e)), -48))
	}
	LogCompress(env, env, 0, 48)
	for i := range env {
		if math.Abs(float64(env[i]-want[i])) > dbTol {
			t.Fatalf("in place [%d] = %g, want %g", i, env[i], want[i])
		}
	}
	for name, f := range map[string]func(){
		"zero range":     func() { LogCompress(nil, env, 0, 0) },
		"negative range": func() { LogCompress(nil, env, 0, -10) },
		"NaN range":      func() { LogCompress(nil, env, 0, float32(math.NaN())) },
		"short dst":      func() { LogCompress(make([]float32, 3), env, 0, 60) },
	} {
		if !panics(f) {
			t.Errorf("%s: did not panic", name)
		}
	}
}
