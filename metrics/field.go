package metrics

import (
	"errors"
	"fmt"
	"math"
)

// Field is a sampled envelope (linear amplitude, not dB) on a rectangular grid:
// V[iz*len(X)+ix], X and Z pixel centres in m, both increasing and uniformly
// spaced.
type Field struct {
	X, Z []float64
	V    []float64
}

// uniformTol is the relative departure from uniform spacing that Validate
// accepts: grids built as start + i*step in float64 differ from exact
// uniformity by rounding only (about 1e-16 relative); 1e-6 also admits grids
// that went through float32.
const uniformTol = 1e-6

// Validate reports whether f is a usable field: at least two pixel centres on
// each axis, finite, increasing and uniformly spaced, and len(V) equal to
// len(X)*len(Z). It does not scan V; non-finite values propagate into results.
func (f *Field) Validate() error {
	if f == nil {
		return errors.New("metrics: field is nil")
	}
	if err := checkAxis("x", f.X); err != nil {
		return err
	}
	if err := checkAxis("z", f.Z); err != nil {
		return err
	}
	if want := len(f.X) * len(f.Z); len(f.V) != want {
		return fmt.Errorf("metrics: field has %d values, want len(X)*len(Z) = %d*%d = %d", len(f.V), len(f.X), len(f.Z), want)
	}
	return nil
}

func checkAxis(name string, a []float64) error {
	if len(a) < 2 {
		return fmt.Errorf("metrics: field %s axis has %d pixel centres, need at least 2", name, len(a))
	}
	for i, v := range a {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("metrics: field %s[%d] is not finite: %g", name, i, v)
		}
	}
	step := (a[len(a)-1] - a[0]) / float64(len(a)-1)
	if !(step > 0) {
		return fmt.Errorf("metrics: field %s axis must increase, runs from %g to %g", name, a[0], a[len(a)-1])
	}
	for i := 1; i < len(a); i++ {
		if d := a[i] - a[i-1]; math.Abs(d-step) > uniformTol*step {
			return fmt.Errorf("metrics: field %s axis is not uniform: step %d is %g, mean step %g", name, i, d, step)
		}
	}
	return nil
}

// Dx returns the lateral pixel spacing in m.
func (f *Field) Dx() float64 { return (f.X[len(f.X)-1] - f.X[0]) / float64(len(f.X)-1) }

// Dz returns the axial pixel spacing in m.
func (f *Field) Dz() float64 { return (f.Z[len(f.Z)-1] - f.Z[0]) / float64(len(f.Z)-1) }

// At returns the value of pixel (ix, iz). It panics when the index is out of
// range.
func (f *Field) At(ix, iz int) float64 {
	if ix < 0 || ix >= len(f.X) || iz < 0 || iz >= len(f.Z) {
		panic(fmt.Sprintf("metrics: Field.At: pixel (%d, %d) outside the %d x %d grid", ix, iz, len(f.X), len(f.Z)))
	}
	return f.V[iz*len(f.X)+ix]
}

// edgeTol is how far outside the outermost pixel centres, in pixels, Bilinear
// still answers (clamped to the edge): coordinates computed as start + i*step
// may overshoot the last centre by rounding.
const edgeTol = 1e-9

// Bilinear returns the bilinearly interpolated value at (x, z):
//
//	v = (1-tx)(1-tz) V[ix,iz] + tx (1-tz) V[ix+1,iz] + (1-tx) tz V[ix,iz+1] + tx tz V[ix+1,iz+1]
//
// with ix + tx = (x - X[0]) / dx and iz + tz = (z - Z[0]) / dz. Points outside
// the rectangle spanned by the pixel centres give NaN. f must be valid (see
// Validate).
func (f *Field) Bilinear(x, z float64) float64 {
	ix, tx, okx := cell(x, f.X[0], f.Dx(), len(f.X))
	iz, tz, okz := cell(z, f.Z[0], f.Dz(), len(f.Z))
	if !okx || !okz {
		return math.NaN()
	}
	nx := len(f.X)
	i := iz*nx + ix
	v00, v10 := f.V[i], f.V[i+1]
	v01, v11 := f.V[i+nx], f.V[i+nx+1]
	return (1-tz)*((1-tx)*v00+tx*v10) + tz*((1-tx)*v01+tx*v11)
}

// cell returns the index of the left node of the grid cell holding u and the
// fractional position in it; ok is false outside the grid.
func cell(u, start, step float64, n int) (i int, t float64, ok bool) {
	p := (u - start) / step
	last := float64(n - 1)
	if !(p >= -edgeTol && p <= last+edgeTol) { // also rejects NaN
		return 0, 0, false
	}
	p = min(max(p, 0), last)
	i = int(p)
	if i >= n-1 {
		i = n - 2
	}
	return i, p - float64(i), true
}
