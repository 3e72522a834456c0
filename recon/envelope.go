package recon

import (
	"math"
)

// Envelope returns the magnitude of each pixel of a complex image.
func Envelope(img []complex64) []float64 {
	out := make([]float64, len(img))
	for i, v := range img {
		out[i] = math.Hypot(float64(real(v)), float64(imag(v)))
	}
	return out
}

// LogCompress returns 20 log10(env / ref) clipped below at -dynamicRangeDB;
// ref is the maximum of env when ref <= 0. Zero pixels map to the floor.
func LogCompress(env []float64, ref, dynamicRangeDB float64) []float64 {
	if ref <= 0 {
		for _, v := range env {
			ref = math.Max(ref, v)
		}
	}
	out := make([]float64, len(env))
	floor := -math.Abs(dynamicRangeDB)
	for i, v := range env {
		if ref <= 0 || v <= 0 {
			out[i] = floor
			continue
		}
		out[i] = math.Max(20*math.Log10(v/ref), floor)
	}
	return out
}

// ToRect resamples per-pixel values of grid g onto a rectangular raster with
// pixel centres xs, zs (m) by bilinear interpolation: in (x, z) for a
// rectangular grid, in (radius, angle) for a sector grid (scan conversion).
// Raster pixels outside g are NaN.
func ToRect(vals []float64, g *Grid, xs, zs []float64) []float64 {
	out := make([]float64, len(xs)*len(zs))
	for r, z := range zs {
		for c, x := range xs {
			var u, v float64 // fractional row, column in g
			switch g.Kind {
			case Sector:
				rad := math.Hypot(x-g.OriginX, z-g.OriginZ)
				th := math.Atan2(x-g.OriginX, z-g.OriginZ)
				u = frac(g.R, rad)
				v = frac(g.Theta, th)
			default:
				u = frac(g.Z, z)
				v = frac(g.X, x)
			}
			out[r*len(xs)+c] = bilinear(vals, g.Rows, g.Cols, u, v)
		}
	}
	return out
}

// frac returns the fractional index of v in the uniform axis a, or NaN when
// outside.
func frac(a []float64, v float64) float64 {
	n := len(a)
	if n == 1 {
		if math.Abs(v-a[0]) < 1e-12 {
			return 0
		}
		return math.NaN()
	}
	f := (v - a[0]) / (a[n-1] - a[0]) * float64(n-1)
	if f < -1e-9 || f > float64(n-1)+1e-9 {
		return math.NaN()
	}
	return math.Min(math.Max(f, 0), float64(n-1))
}

func bilinear(vals []float64, rows, cols int, u, v float64) float64 {
	if math.IsNaN(u) || math.IsNaN(v) {
		return math.NaN()
	}
	r0, c0 := int(u), int(v)
	r1, c1 := min(r0+1, rows-1), min(c0+1, cols-1)
	fu, fv := u-float64(r0), v-float64(c0)
	a := vals[r0*cols+c0]*(1-fv) + vals[r0*cols+c1]*fv
	b := vals[r1*cols+c0]*(1-fv) + vals[r1*cols+c1]*fv
	return a*(1-fu) + b*fu
}
