package dsp

import (
	"fmt"
	"math"
	"math/cmplx"
	"testing"
)

const (
	// polyTol32 bounds the float32 round-off of interpolating polynomial data
	// of magnitude up to ~100: a few ulps (6e-8 relative) of the largest
	// sample, with slack for the Horner form's cancellations.
	polyTol32 = 1e-4
	// polyTol64 is the float64 counterpart.
	polyTol64 = 1e-11
	// unitTol32 is float32 round-off on unit-magnitude complex exponentials.
	unitTol32 = 2e-6
	// refKernelTol bounds the difference between the Horner-form Cubic and
	// the explicit Keys-kernel reference on unit-variance data in float32.
	refKernelTol = 1e-5
)

// linearRef is the plain reference for Linear: floor and complex arithmetic.
func linearRef(x []complex64, t float32) complex64 {
	if !(t >= 0) || t > float32(len(x)-1) {
		return 0
	}
	i := int(math.Floor(float64(t)))
	if i == len(x)-1 {
		return x[i]
	}
	f := complex(t-float32(i), 0)
	return (1-f)*x[i] + f*x[i+1]
}

// keysKernel is Keys' (1981) cubic convolution kernel with a = -1/2:
//
//	W(s) = (a+2)|s|^3 - (a+3)|s|^2 + 1   for |s| <= 1
//	W(s) = a|s|^3 - 5a|s|^2 + 8a|s| - 4a for 1 < |s| < 2
//	W(s) = 0                             otherwise
func keysKernel(s float64) float64 {
	const a = -0.5
	s = math.Abs(s)
	switch {
	case s <= 1:
		return ((a+2)*s-(a+3))*s*s + 1
	case s < 2:
		return ((a*s-5*a)*s+8*a)*s - 4*a
	}
	return 0
}

// cubicRef is the plain reference for Cubic in the interior: the sum of the
// four samples weighted by the Keys kernel, x(t) = sum_k x[k] W(t - k).
func cubicRef(x []complex64, t float32) complex64 {
	i := int(math.Floor(float64(t)))
	if i < 1 || i+2 >= len(x) {
		return Cubic(x, t) // the edges are not what this reference checks
	}
	var s complex128
	for k := i - 1; k <= i+2; k++ {
		s += complex128(x[k]) * complex(keysKernel(float64(t)-float64(k)), 0)
	}
	return complex64(s)
}

// polySignal returns x[n] = p(n) for the complex polynomial with coefficients
// c (c[0] + c[1] n + c[2] n^2 + ...), in float32 and float64 (real part).
func polySignal(n int, c []complex128) ([]complex64, []float64) {
	x := make([]complex64, n)
	xr := make([]float64, n)
	for i := range x {
		xr[i] = real(polyAt(c, float64(i)))
		x[i] = complex64(polyAt(c, float64(i)))
	}
	return x, xr
}

func polyAt(c []complex128, t float64) complex128 {
	var v complex128
	for k := len(c) - 1; k >= 0; k-- {
		v = v*complex(t, 0) + c[k]
	}
	return v
}

func TestInterpExactOnPolynomials(t *testing.T) {
	t.Parallel()
	// Closed form: linear interpolation reproduces polynomials of degree <= 1
	// and Keys' cubic (a = -1/2) those of degree <= 2 (Keys 1981), the latter
	// up to the ends because the boundary extrapolation 3x0 - 3x1 + x2 is exact
	// for quadratics (their third difference vanishes).
	const n = 10 // small so that t reaches both edge intervals often
	line := []complex128{complex(1.5, -2), complex(0.75, 0.5)}
	quad := []complex128{complex(-1, 0.25), complex(0.5, -1), complex(0.8, 0.3)}
	xl, xlr := polySignal(n, line)
	xq, xqr := polySignal(n, quad)
	rng := newRand()
	for range 20000 {
		t64 := rng.Float64() * (n - 1)
		t32 := float32(t64)
		tt := float64(t32) // evaluate the truth at the float32 index used
		if got, want := Linear(xl, t32), polyAt(line, tt); cmplx.Abs(complex128(got)-want) > polyTol32 {
			t.Fatalf("Linear(line, %v) = %v, want %v", t32, got, want)
		}
		if got, want := Cubic(xl, t32), polyAt(line, tt); cmplx.Abs(complex128(got)-want) > polyTol32 {
			t.Fatalf("Cubic(line, %v) = %v, want %v", t32, got, want)
		}
		if got, want := Cubic(xq, t32), polyAt(quad, tt); cmplx.Abs(complex128(got)-want) > polyTol32 {
			t.Fatalf("Cubic(quadratic, %v) = %v, want %v", t32, got, want)
		}
		if got, want := LinearReal(xlr, t64), real(polyAt(line, t64)); math.Abs(got-want) > polyTol64 {
			t.Fatalf("LinearReal(line, %v) = %v, want %v", t64, got, want)
		}
		if got, want := CubicReal(xqr, t64), real(polyAt(quad, t64)); math.Abs(got-want) > polyTol64 {
			t.Fatalf("CubicReal(quadratic, %v) = %v, want %v", t64, got, want)
		}
	}
	// Three samples: both ghost points are extrapolated.
	x3, x3r := polySignal(3, quad)
	for _, tt := range []float64{0, 0.3, 1, 1.7, 2} {
		if got, want := Cubic(x3, float32(tt)), polyAt(quad, tt); cmplx.Abs(complex128(got)-want) > polyTol32 {
			t.Errorf("Cubic(3 samples, %v) = %v, want %v", tt, got, want)
		}
		if got, want := CubicReal(x3r, tt), real(polyAt(quad, tt)); math.Abs(got-want) > polyTol64 {
			t.Errorf("CubicReal(3 samples, %v) = %v, want %v", tt, got, want)
		}
	}
	// Linear is not exact on a quadratic: the check above has teeth.
	if got, want := Linear(xq, 4.5), polyAt(quad, 4.5); cmplx.Abs(complex128(got)-want) < 0.1 {
		t.Errorf("Linear reproduced a quadratic: %v vs %v", got, want)
	}
}

func TestInterpAtSamples(t *testing.T) {
	t.Parallel()
	// At integer t the fraction is 0 and both interpolators return the sample
	// bit for bit.
	rng := newRand()
	x := make([]complex64, 17)
	xr := make([]float64, len(x))
	for i := range x {
		x[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
		xr[i] = rng.NormFloat64()
	}
	for i := range x {
		if Linear(x, float32(i)) != x[i] || Cubic(x, float32(i)) != x[i] {
			t.Fatalf("sample %d not returned exactly: %v %v vs %v", i, Linear(x, float32(i)), Cubic(x, float32(i)), x[i])
		}
		if LinearReal(xr, float64(i)) != xr[i] || CubicReal(xr, float64(i)) != xr[i] {
			t.Fatalf("real sample %d not returned exactly", i)
		}
	}
}

func TestInterpOutside(t *testing.T) {
	t.Parallel()
	x := []complex64{1 + 1i, 2, 3, 4 - 1i, 5}
	xr := []float64{1, 2, 3, 4, 5}
	inf := float32(math.Inf(1))
	nan := float32(math.NaN())
	outside := []float32{-1e-6, -0.5, -1, -inf, 4.0001, 5, 1e30, inf, nan}
	for _, tt := range outside {
		if v := Linear(x, tt); v != 0 {
			t.Errorf("Linear(x, %v) = %v, want 0", tt, v)
		}
		if v := Cubic(x, tt); v != 0 {
			t.Errorf("Cubic(x, %v) = %v, want 0", tt, v)
		}
		if v := LinearReal(xr, float64(tt)); v != 0 {
			t.Errorf("LinearReal(x, %v) = %v, want 0", tt, v)
		}
		if v := CubicReal(xr, float64(tt)); v != 0 {
			t.Errorf("CubicReal(x, %v) = %v, want 0", tt, v)
		}
	}
	// Degenerate lengths.
	if Linear(nil, 0) != 0 || Cubic(nil, 0) != 0 || LinearReal(nil, 0) != 0 || CubicReal(nil, 0) != 0 {
		t.Error("empty input: want 0")
	}
	one := []complex64{3 - 2i}
	if Linear(one, 0) != one[0] || Cubic(one, 0) != one[0] || Cubic(one, 0.1) != 0 {
		t.Error("single sample: want x[0] at t = 0 and 0 elsewhere")
	}
	if LinearReal([]float64{7}, 0) != 7 || CubicReal([]float64{7}, 0) != 7 {
		t.Error("single real sample: want x[0] at t = 0")
	}
	two := []complex64{0, 2 + 2i}
	if got := Cubic(two, 0.25); got != 0.5+0.5i {
		t.Errorf("Cubic on two samples = %v, want linear 0.5+0.5i", got)
	}
	if got := CubicReal([]float64{0, 2}, 0.25); got != 0.5 {
		t.Errorf("CubicReal on two samples = %v, want linear 0.5", got)
	}
}

func TestInterpBandLimitedError(t *testing.T) {
	t.Parallel()
	// x[n] = exp(j omega n). Closed-form error bounds (h = 1 sample):
	//   linear: the largest error is at the interval midpoint, where the chord
	//   has magnitude cos(omega/2) and the right phase: 1 - cos(omega/2);
	//   cubic interior: Keys' a = -1/2 cubic is the Hermite spline with
	//   central-difference slopes, whose slope error is f'''/6; the Hermite
	//   remainder is f''''/384 and the slope basis functions sum to at most
	//   1/4 in magnitude, so per real component |err| <= w^3/24 + w^4/384, and
	//   sqrt(2) times that for the complex value.
	const n = 64
	for _, w := range []float64{0.1, 0.5, 1, math.Pi / 2, 2.5} {
		t.Run(fmt.Sprintf("omega=%g", w), func(t *testing.T) {
			t.Parallel()
			x := make([]complex64, n)
			for i := range x {
				x[i] = complex64(cmplx.Exp(complex(0, w*float64(i))))
			}
			linBound := 1 - math.Cos(w/2)
			cubBound := math.Sqrt2 * (w*w*w/24 + w*w*w*w/384)
			var linMax, cubMax float64
			for k := 0; k <= 1000*(n-3); k++ {
				tt := float32(1 + float64(k)/1000) // interior: [1, n-2]
				want := cmplx.Exp(complex(0, w*float64(tt)))
				linMax = max(linMax, cmplx.Abs(complex128(Linear(x, tt))-want))
				cubMax = max(cubMax, cmplx.Abs(complex128(Cubic(x, tt))-want))
			}
			if linMax > linBound+unitTol32 || linMax < linBound-unitTol32 {
				t.Errorf("linear max error %.6g, closed form %.6g", linMax, linBound)
			}
			if cubMax > cubBound+unitTol32 {
				t.Errorf("cubic max error %.6g exceeds bound %.6g", cubMax, cubBound)
			}
			// The cubic must beat linear on oversampled data.
			if w <= math.Pi/2 && cubMax >= linMax/2 {
				t.Errorf("cubic error %.3g not well below linear %.3g", cubMax, linMax)
			}
		})
	}
}

func TestCubicMatchesKernel(t *testing.T) {
	t.Parallel()
	// Reference: cubicRef, the explicit Keys-kernel weighted sum.
	rng := newRand()
	x := make([]complex64, 100)
	for i := range x {
		x[i] = complex(float32(rng.NormFloat64()), float32(rng.NormFloat64()))
	}
	for range 10000 {
		tt := float32(1 + rng.Float64()*97)
		if got, want := Cubic(x, tt), cubicRef(x, tt); cmplx.Abs(complex128(got-want)) > refKernelTol {
			t.Fatalf("Cubic(x, %v) = %v, kernel sum %v", tt, got, want)
		}
		if got, want := Linear(x, tt), linearRef(x, tt); cmplx.Abs(complex128(got-want)) > refKernelTol {
			t.Fatalf("Linear(x, %v) = %v, reference %v", tt, got, want)
		}
	}
	// The real version agrees with the complex one on the real part.
	xr := make([]float64, len(x))
	for i := range x {
		xr[i] = float64(real(x[i]))
	}
	for range 1000 {
		tt := float64(float32(rng.Float64() * 99)) // the same index for both
		if got, want := CubicReal(xr, tt), float64(real(Cubic(x, float32(tt)))); math.Abs(got-want) > refKernelTol {
			t.Fatalf("CubicReal(x, %v) = %v, Cubic %v", tt, got, want)
		}
	}
}

// TestInterpAllocs is not parallel: testing.AllocsPerRun refuses to run beside
// parallel tests.
func TestInterpAllocs(t *testing.T) {
	x := make([]complex64, 64)
	var sink complex64
	if a := testing.AllocsPerRun(100, func() { sink += Linear(x, 3.3) + Cubic(x, 0.4) + Cubic(x, 30.1) }); a != 0 {
		t.Errorf("interpolation allocates %v times", a)
	}
	_ = sink
}
