package dsp

import (
	"fmt"

	"gonum.org/v1/gonum/dsp/fourier"
)

// Hilbert is a reusable plan that turns real signals of length N into analytic
// signals z = x + j H{x}, where H is the Hilbert transform, by the FFT method
// (Marple 1999): zero the negative frequencies, double the positive ones, and
// keep DC and (for an even transform length) Nyquist once.
//
// The plan zero-pads x internally to a 5-smooth length M >= N + pad, with
// pad = max(ceil(N/4), 16), and returns the first N samples. Without padding
// the transform is circular: the Hilbert kernel's slowly decaying 1/n tails
// carry energy from one end of the record into the other (a strong echo in the
// last samples shows up as a spurious envelope in the first ones). With the
// padding, the wrapped contribution at distance d falls to about 2/(pi d), with
// d >= pad.
//
// Implementation: since z = x + j h and the spectrum of h, -j sign(k) X[k], is
// Hermitian, h is computed with two real FFTs of length M and the real part of
// the result is x itself, bit for bit.
//
// A Hilbert is not safe for concurrent use; make one per worker.
type Hilbert struct {
	n, m  int
	fft   *fourier.FFT
	buf   []float64    // length m: padded input, then h scaled by m
	coeff []complex128 // length m/2+1
}

// NewHilbert returns a plan for real signals of length n. It panics if n < 1.
func NewHilbert(n int) *Hilbert {
	if n < 1 {
		panic(fmt.Sprintf("dsp: NewHilbert: length must be positive, got %d", n))
	}
	return newHilbertLen(n, NextFastLen(n+hilbertPad(n)))
}

// hilbertPad returns the zero padding NewHilbert adds to a signal of length n:
// at least a quarter of n and at least 16 samples.
func hilbertPad(n int) int {
	return max((n+3)/4, 16)
}

// newHilbertLen returns a plan for signals of length n that transforms at
// length m >= n. With m == n it reproduces the textbook circular (unpadded)
// result, which is what the tests compare with SciPy's scipy.signal.hilbert.
func newHilbertLen(n, m int) *Hilbert {
	if n < 1 || m < n {
		panic(fmt.Sprintf("dsp: newHilbertLen: need 1 <= n <= m, got n=%d m=%d", n, m))
	}
	return &Hilbert{
		n:     n,
		m:     m,
		fft:   fourier.NewFFT(m),
		buf:   make([]float64, m),
		coeff: make([]complex128, m/2+1),
	}
}

// Len returns the signal length N the plan was made for.
func (h *Hilbert) Len() int { return h.n }

// transformedLen returns the padded FFT length M.
func (h *Hilbert) transformedLen() int { return h.m }

// quadrature replaces h.buf (the zero-padded input, length M) by M times the
// Hilbert transform of it: the spectrum is multiplied by -j for positive
// frequencies and DC and Nyquist are zeroed; the real inverse FFT supplies the
// Hermitian negative half (+j) by itself.
func (h *Hilbert) quadrature() {
	c := h.fft.Coefficients(h.coeff, h.buf)
	for k, v := range c {
		c[k] = complex(imag(v), -real(v)) // -j * v
	}
	c[0] = 0
	if h.m%2 == 0 {
		c[len(c)-1] = 0 // Nyquist is kept once in z, so H{x} has none
	}
	h.fft.Sequence(h.buf, c)
}

// Analytic writes the analytic signal of x (length N) into dst (length N,
// allocated if nil) and returns it. The real part of dst equals x exactly.
// The transform runs in float64. It panics if len(x) or a non-nil len(dst) is
// not N.
func (h *Hilbert) Analytic(dst []complex64, x []float32) []complex64 {
	h.checkLen(len(x), len(dst), dst == nil)
	if dst == nil {
		dst = make([]complex64, h.n)
	}
	buf := h.buf
	in := buf[:len(x)]
	for i, v := range x {
		in[i] = float64(v)
	}
	clear(buf[h.n:])
	h.quadrature()
	scale := 1 / float64(h.m)
	dst = dst[:len(x)]
	buf = buf[:len(x)]
	for i, v := range x {
		dst[i] = complex(v, float32(buf[i]*scale))
	}
	return dst
}

// Analytic64 is the float64 version of [Hilbert.Analytic].
func (h *Hilbert) Analytic64(dst []complex128, x []float64) []complex128 {
	h.checkLen(len(x), len(dst), dst == nil)
	if dst == nil {
		dst = make([]complex128, h.n)
	}
	buf := h.buf
	copy(buf, x)
	clear(buf[h.n:])
	h.quadrature()
	scale := 1 / float64(h.m)
	dst = dst[:len(x)]
	buf = buf[:len(x)]
	for i, v := range x {
		dst[i] = complex(v, buf[i]*scale)
	}
	return dst
}

func (h *Hilbert) checkLen(nx, ndst int, dstNil bool) {
	if nx != h.n {
		panic(fmt.Sprintf("dsp: Hilbert: input length %d, plan length %d", nx, h.n))
	}
	if !dstNil && ndst != h.n {
		panic(fmt.Sprintf("dsp: Hilbert: destination length %d, plan length %d", ndst, h.n))
	}
}

// NextFastLen returns the smallest n' >= n whose only prime factors are 2, 3
// and 5 (a 5-smooth or "regular" number), the lengths at which the mixed-radix
// FFT is fastest. It returns 1 for n <= 1 and panics if no such int exists
// (n within a few percent of the largest int).
func NextFastLen(n int) int {
	if n <= 1 {
		return 1
	}
	best := -1
	// Enumerate 5^a * 3^b <= n and complete each with the smallest power of two
	// that reaches n; the guards keep every product below MaxInt.
	for p5 := 1; ; p5 *= 5 {
		for p35 := p5; ; p35 *= 3 {
			v := p35
			for v < n && v <= maxInt/2 {
				v <<= 1
			}
			if v >= n && (best < 0 || v < best) {
				best = v
			}
			if p35 >= n || p35 > maxInt/3 {
				break
			}
		}
		if p5 >= n || p5 > maxInt/5 {
			break
		}
	}
	if best < 0 {
		panic(fmt.Sprintf("dsp: NextFastLen: no 5-smooth int >= %d", n))
	}
	return best
}

const maxInt = int(^uint(0) >> 1)
