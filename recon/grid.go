package recon

import (
	"fmt"
	"math"
)

// GridKind tells how pixels are laid out.
type GridKind int

// Grid kinds.
const (
	Rect   GridKind = iota + 1 // rows along z, columns along x
	Sector                     // rows along radius, columns along angle
)

// Grid is a set of pixel positions with a 2-D shape. Pixels are stored row
// by row: pixel (row, col) has index row*Cols + col.
type Grid struct {
	Kind       GridKind
	Rows, Cols int
	// Rect: X (Cols) and Z (Rows) pixel centres, m.
	X, Z []float64
	// Sector: origin, radii (Rows) and angles from +z towards +x (Cols, rad).
	OriginX, OriginZ float64
	R, Theta         []float64
	// PX, PZ hold every pixel's position, m.
	PX, PZ []float64
}

// MaxPixels bounds a grid.
const MaxPixels = 1 << 24

// NewRect returns a rectangular grid from x0 to x1 and z0 to z1 (m) with
// spacings dx and dz; both ends are included when they fall on the spacing.
func NewRect(x0, x1, dx, z0, z1, dz float64) (Grid, error) {
	xs, err := axis(x0, x1, dx, "x")
	if err != nil {
		return Grid{}, err
	}
	zs, err := axis(z0, z1, dz, "z")
	if err != nil {
		return Grid{}, err
	}
	return RectFromAxes(xs, zs)
}

// RectFromAxes returns a rectangular grid with the given pixel centres.
func RectFromAxes(xs, zs []float64) (Grid, error) {
	if len(xs) == 0 || len(zs) == 0 {
		return Grid{}, fmt.Errorf("grid: empty axis")
	}
	if len(xs)*len(zs) > MaxPixels {
		return Grid{}, fmt.Errorf("grid: %d x %d pixels, over the limit of %d", len(zs), len(xs), MaxPixels)
	}
	g := Grid{Kind: Rect, Rows: len(zs), Cols: len(xs), X: xs, Z: zs}
	g.PX = make([]float64, g.Rows*g.Cols)
	g.PZ = make([]float64, g.Rows*g.Cols)
	for r, z := range zs {
		for c, x := range xs {
			g.PX[r*g.Cols+c] = x
			g.PZ[r*g.Cols+c] = z
		}
	}
	return g, nil
}

func axis(a, b, d float64, name string) ([]float64, error) {
	if !(d > 0) || math.IsInf(d, 0) || math.IsNaN(a) || math.IsNaN(b) || math.IsInf(a, 0) || math.IsInf(b, 0) {
		return nil, fmt.Errorf("grid: %s: spacing must be positive and limits finite", name)
	}
	if b < a {
		return nil, fmt.Errorf("grid: %s: end %g is before start %g", name, b, a)
	}
	n := int(math.Floor((b-a)/d+1e-9)) + 1
	if n > MaxPixels {
		return nil, fmt.Errorf("grid: %s: %d samples, too many", name, n)
	}
	out := make([]float64, n)
	for i := range out {
		out[i] = a + float64(i)*d
	}
	return out, nil
}

// NewSector returns a sector grid centred on (ox, oz): radii r0..r1 step dr
// and angles th0..th1 step dth (rad, from +z towards +x).
func NewSector(ox, oz, r0, r1, dr, th0, th1, dth float64) (Grid, error) {
	rs, err := axis(r0, r1, dr, "radius")
	if err != nil {
		return Grid{}, err
	}
	ts, err := axis(th0, th1, dth, "angle")
	if err != nil {
		return Grid{}, err
	}
	if r0 < 0 {
		return Grid{}, fmt.Errorf("grid: radius must not be negative")
	}
	if math.Abs(th0) >= math.Pi/2 || math.Abs(th1) >= math.Pi/2 {
		return Grid{}, fmt.Errorf("grid: sector angles must be within +/-90 degrees")
	}
	if len(rs)*len(ts) > MaxPixels {
		return Grid{}, fmt.Errorf("grid: %d x %d pixels, over the limit of %d", len(rs), len(ts), MaxPixels)
	}
	g := Grid{Kind: Sector, Rows: len(rs), Cols: len(ts), OriginX: ox, OriginZ: oz, R: rs, Theta: ts}
	g.PX = make([]float64, g.Rows*g.Cols)
	g.PZ = make([]float64, g.Rows*g.Cols)
	for i, r := range rs {
		for j, t := range ts {
			s, c := math.Sincos(t)
			g.PX[i*g.Cols+j] = ox + r*s
			g.PZ[i*g.Cols+j] = oz + r*c
		}
	}
	return g, nil
}

// Points returns a grid of arbitrary pixel positions, one row.
func Points(px, pz []float64) (Grid, error) {
	if len(px) != len(pz) || len(px) == 0 {
		return Grid{}, fmt.Errorf("grid: need matching, non-empty coordinate lists")
	}
	return Grid{Kind: Rect, Rows: 1, Cols: len(px), PX: append([]float64(nil), px...), PZ: append([]float64(nil), pz...)}, nil
}

// Len returns the number of pixels.
func (g *Grid) Len() int { return len(g.PX) }
