package dsp_test

import (
	"fmt"
	"math"

	"celerity/internal/dsp"
)

// pulse returns a Gaussian-modulated cosine, exp(-(i-c)^2 / (2 sigma^2))
// cos(omega (i - c)), omega in rad/sample.
func pulse(n int, c, omega, sigma float64) []float32 {
	x := make([]float32, n)
	for i := range x {
		t := float64(i) - c
		x[i] = float32(math.Exp(-t*t/(2*sigma*sigma)) * math.Cos(omega*t))
	}
	return x
}

// The envelope of an RF echo: analytic signal, magnitude, sub-sample peak.
func ExampleHilbert() {
	// A 5 MHz echo sampled at 40 MHz: omega = 2 pi 5/40 rad/sample.
	omega := 2 * math.Pi * 5e6 / 40e6
	x := pulse(512, 200.4, omega, 6)

	h := dsp.NewHilbert(len(x)) // one plan per worker, reused for every line
	z := h.Analytic(nil, x)
	env := dsp.Envelope(nil, z)

	env64 := make([]float64, len(env))
	for i, v := range env {
		env64[i] = float64(v)
	}
	pos, peak := dsp.RefinedMax(env64)
	fmt.Printf("echo at sample %.1f (%.3f us), amplitude %.2f\n", pos, pos/40e6*1e6, peak)
	// Output:
	// echo at sample 200.4 (5.010 us), amplitude 1.00
}

// Receive apodization across an aperture of 9 elements.
func ExampleParseWindow() {
	w, err := dsp.ParseWindow("tukey:0.5")
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Print(w, ":")
	for e := range 9 {
		u := -1 + 2*float64(e)/8 // element position across the aperture, -1..1
		fmt.Printf(" %.2f", w.At(u))
	}
	fmt.Println()
	// Output:
	// tukey:0.5: 0.00 0.50 1.00 1.00 1.00 1.00 1.00 0.50 0.00
}

// Fractional-sample lookups, as delay-and-sum does for each pixel and element.
func ExampleCubic() {
	// x[n] = n^2 + j n: a quadratic, which the cubic reproduces and the
	// linear interpolator does not.
	x := make([]complex64, 8)
	for n := range x {
		x[n] = complex(float32(n*n), float32(n))
	}
	fmt.Println("linear:", dsp.Linear(x, 2.5))
	fmt.Println("cubic: ", dsp.Cubic(x, 2.5))
	fmt.Println("outside:", dsp.Cubic(x, 7.5))
	// Output:
	// linear: (6.5+2.5i)
	// cubic:  (6.25+2.5i)
	// outside: (0+0i)
}

// Arrival-time difference between two channels that see the same echo 1.3
// samples apart.
func ExampleXCorrLag() {
	omega := 2 * math.Pi * 0.1 // 5 MHz at 50 MHz
	h := dsp.NewHilbert(128)
	a := h.Analytic(nil, pulse(128, 60, omega, 5))
	b := h.Analytic(nil, pulse(128, 61.3, omega, 5)) // b is a delayed by 1.3

	lag, coef := dsp.XCorrLag(a, b, 4)
	fmt.Printf("cross-correlation: lag %+.2f samples, coefficient %.2f\n", lag, coef)

	// Refine by the phase at the carrier, after removing the integer part.
	shift := int(math.Round(lag))
	fine, _ := dsp.PhaseLag(a[10:110], b[10+shift:110+shift], omega)
	fmt.Printf("phase refinement: lag %+.3f samples\n", float64(shift)+fine)
	// Output:
	// cross-correlation: lag +1.30 samples, coefficient 1.00
	// phase refinement: lag +1.300 samples
}

func ExampleRefinedMax() {
	// Samples of 1 - (i - 2.25)^2 / 4: the peak lies between samples 2 and 3.
	y := []float64{-0.265625, 0.609375, 0.984375, 0.859375, 0.234375}
	pos, value := dsp.RefinedMax(y)
	fmt.Printf("peak %.2f at %.2f\n", value, pos)
	// Output:
	// peak 1.00 at 2.25
}

func ExampleLogCompress() {
	env := []float32{1, 0.5, 0.1, 0.001, 0}
	fmt.Println(dsp.LogCompress(nil, env, 0, 40)) // reference: the maximum
	// Output:
	// [0 -6.0206 -20 -40 -40]
}

func ExampleNextFastLen() {
	fmt.Println(dsp.NextFastLen(2048+512), dsp.NextFastLen(1000+250), dsp.NextFastLen(97))
	// Output:
	// 2560 1250 100
}
