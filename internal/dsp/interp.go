package dsp

// Interpolation of uniformly sampled signals at a fractional sample index t.
// Sample i sits at t = i; outside [0, len-1] (and for NaN t) the functions
// return 0, which is what delay-and-sum wants for echoes that arrive before the
// first or after the last recorded sample.
//
// The float32 index keeps about 24 bits: at t near 10^4 samples it resolves
// about 1e-3 sample, ample for receive delays.

// Linear returns x at fractional index t by linear interpolation,
//
//	x(t) = (1 - f) x[i] + f x[i+1],  i = floor(t), f = t - i,
//
// and 0 outside [0, len(x)-1]. It is small enough to inline and does not
// allocate.
func Linear(x []complex64, t float32) complex64 {
	if !(t >= 0) || t > float32(len(x)-1) { // also rejects NaN and empty x
		return 0
	}
	// i = len-1 only when t is the last sample (f = 0), so x[i+1] is never
	// read past the end; the f == 0 branch also returns exact samples as is.
	i := min(int(t), len(x)-1)
	f := t - float32(i)
	a := x[i]
	if f == 0 {
		return a
	}
	b := x[i+1]
	return complex(real(a)+f*(real(b)-real(a)), imag(a)+f*(imag(b)-imag(a)))
}

// LinearReal is the float64 version of [Linear].
func LinearReal(x []float64, t float64) float64 {
	if !(t >= 0) || t > float64(len(x)-1) {
		return 0
	}
	i := min(int(t), len(x)-1)
	f := t - float64(i)
	if f == 0 {
		return x[i]
	}
	return x[i] + f*(x[i+1]-x[i])
}

// Cubic returns x at fractional index t by Keys' cubic convolution with
// a = -1/2 (the Catmull-Rom spline), and 0 outside [0, len(x)-1]. With
// i = floor(t), f = t - i and the four samples p0..p3 = x[i-1..i+2],
//
//	x(t) = p1 + f/2 (p2 - p0 + f (2 p0 - 5 p1 + 4 p2 - p3 + f (3 (p1 - p2) + p3 - p0)))
//
// which is the cubic Hermite spline through p1, p2 with central-difference
// slopes. It reproduces polynomials up to degree 2 exactly and has O(h^3)
// error on smooth signals (Keys 1981). In the first and last interval the
// missing neighbour is extrapolated with Keys' boundary condition,
// x[-1] = 3 x[0] - 3 x[1] + x[2] (and likewise at the far end), which keeps
// quadratics exact up to the ends; with only two samples it falls back to
// linear interpolation. It does not allocate.
func Cubic(x []complex64, t float32) complex64 {
	if !(t >= 0) || t > float32(len(x)-1) {
		return 0
	}
	i := int(t)
	if i < 1 || i+2 >= len(x) {
		return cubicEdge(x, t)
	}
	f := t - float32(i)
	p := x[i-1 : i+3 : i+3]
	return complex(
		catmullRom32(real(p[0]), real(p[1]), real(p[2]), real(p[3]), f),
		catmullRom32(imag(p[0]), imag(p[1]), imag(p[2]), imag(p[3]), f))
}

// cubicEdge is Cubic for 0 <= t <= len(x)-1 in the first and last interval,
// kept out of line so that the interior path stays short.
func cubicEdge(x []complex64, t float32) complex64 {
	n := len(x)
	i := min(int(t), n-1)
	if i == n-1 {
		return x[n-1]
	}
	if n == 2 {
		return Linear(x, t)
	}
	f := t - float32(i)
	var p0, p3 complex64
	if i >= 1 {
		p0 = x[i-1]
	} else {
		p0 = 3*x[0] - 3*x[1] + x[2]
	}
	if i+2 < n {
		p3 = x[i+2]
	} else {
		p3 = 3*x[n-1] - 3*x[n-2] + x[n-3]
	}
	p1, p2 := x[i], x[i+1]
	return complex(
		catmullRom32(real(p0), real(p1), real(p2), real(p3), f),
		catmullRom32(imag(p0), imag(p1), imag(p2), imag(p3), f))
}

// CubicReal is the float64 version of [Cubic].
func CubicReal(x []float64, t float64) float64 {
	if !(t >= 0) || t > float64(len(x)-1) {
		return 0
	}
	n := len(x)
	i := int(t)
	if i >= 1 && i+2 < n {
		p := x[i-1 : i+3 : i+3]
		return catmullRom64(p[0], p[1], p[2], p[3], t-float64(i))
	}
	i = min(i, n-1)
	if i == n-1 {
		return x[n-1]
	}
	if n == 2 {
		return LinearReal(x, t)
	}
	var p0, p3 float64
	if i >= 1 {
		p0 = x[i-1]
	} else {
		p0 = 3*x[0] - 3*x[1] + x[2]
	}
	if i+2 < n {
		p3 = x[i+2]
	} else {
		p3 = 3*x[n-1] - 3*x[n-2] + x[n-3]
	}
	return catmullRom64(p0, x[i], x[i+1], p3, t-float64(i))
}

// catmullRom32 evaluates the Keys (a = -1/2) cubic through p1 (f = 0) and
// p2 (f = 1) in Horner form.
func catmullRom32(p0, p1, p2, p3, f float32) float32 {
	return p1 + 0.5*f*(p2-p0+f*(2*p0-5*p1+4*p2-p3+f*(3*(p1-p2)+p3-p0)))
}

func catmullRom64(p0, p1, p2, p3, f float64) float64 {
	return p1 + 0.5*f*(p2-p0+f*(2*p0-5*p1+4*p2-p3+f*(3*(p1-p2)+p3-p0)))
}
