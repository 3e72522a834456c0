package recon_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"celerity/recon"
)

func TestNewRect(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		x0, x1, dx, z0, z1, dz float64
		xs, zs                 []float64
	}{
		// ends on the spacing are included, even after rounding
		{-1e-3, 1e-3, 0.5e-3, 0.01, 0.012, 1e-3, []float64{-1e-3, -0.5e-3, 0, 0.5e-3, 1e-3}, []float64{0.01, 0.011, 0.012}},
		{0, 0.9e-3, 0.3e-3, 0.0, 0.0, 1e-3, []float64{0, 0.3e-3, 0.6e-3, 0.9e-3}, []float64{0}},
		// an end off the spacing is not
		{0, 1e-3, 0.3e-3, 0.02, 0.0205, 0.2e-3, []float64{0, 0.3e-3, 0.6e-3, 0.9e-3}, []float64{0.02, 0.0202, 0.0204}},
	} {
		g, err := recon.NewRect(tc.x0, tc.x1, tc.dx, tc.z0, tc.z1, tc.dz)
		if err != nil {
			t.Fatal(err)
		}
		if g.Kind != recon.Rect || g.Cols != len(tc.xs) || g.Rows != len(tc.zs) || g.Len() != len(tc.xs)*len(tc.zs) {
			t.Fatalf("grid %v: %d x %d, want %d x %d", tc, g.Rows, g.Cols, len(tc.zs), len(tc.xs))
		}
		for c, x := range tc.xs {
			if math.Abs(g.X[c]-x) > 1e-15 {
				t.Errorf("X[%d] = %g, want %g", c, g.X[c], x)
			}
		}
		for r, z := range tc.zs {
			if math.Abs(g.Z[r]-z) > 1e-15 {
				t.Errorf("Z[%d] = %g, want %g", r, g.Z[r], z)
			}
		}
		// pixel (row, col) is at index row*Cols + col
		for r := range g.Rows {
			for c := range g.Cols {
				if g.PX[r*g.Cols+c] != g.X[c] || g.PZ[r*g.Cols+c] != g.Z[r] {
					t.Fatalf("pixel (%d, %d) at (%g, %g), want (%g, %g)", r, c, g.PX[r*g.Cols+c], g.PZ[r*g.Cols+c], g.X[c], g.Z[r])
				}
			}
		}
	}
}

func TestGridErrors(t *testing.T) {
	t.Parallel()
	nan, inf := math.NaN(), math.Inf(1)
	for _, a := range [][6]float64{
		{0, 1e-3, 0, 0, 1e-3, 1e-4},       // zero spacing
		{0, 1e-3, -1e-4, 0, 1e-3, 1e-4},   // negative spacing
		{0, 1e-3, 1e-4, 0, 1e-3, nan},     // NaN spacing
		{0, 1e-3, inf, 0, 1e-3, 1e-4},     // infinite spacing
		{nan, 1e-3, 1e-4, 0, 1e-3, 1e-4},  // NaN limit
		{0, inf, 1e-4, 0, 1e-3, 1e-4},     // infinite limit
		{1e-3, 0, 1e-4, 0, 1e-3, 1e-4},    // end before start
		{0, 1e-3, 1e-4, 2e-3, 1e-3, 1e-4}, // end before start
		{0, 1, 1e-8, 0, 1e-3, 1e-4},       // 1e8 columns, over MaxPixels
		{0, 0.1, 1e-5, 0, 0.1, 1e-5},      // 1e10 pixels
	} {
		if _, err := recon.NewRect(a[0], a[1], a[2], a[3], a[4], a[5]); err == nil {
			t.Errorf("NewRect%v: no error", a)
		}
	}
	if _, err := recon.RectFromAxes(nil, []float64{1}); err == nil {
		t.Error("RectFromAxes with an empty axis: no error")
	}
	if _, err := recon.Points([]float64{1, 2}, []float64{1}); err == nil {
		t.Error("Points with mismatched lists: no error")
	}
	if _, err := recon.Points(nil, nil); err == nil {
		t.Error("Points with no points: no error")
	}
	for _, a := range [][8]float64{
		{0, 0, -0.01, 0.03, 1e-3, -0.5, 0.5, 0.01}, // negative radius
		{0, 0, 0.01, 0.03, 1e-3, -1.6, 0.5, 0.01},  // angle beyond -90 degrees
		{0, 0, 0.01, 0.03, 1e-3, -0.5, math.Pi / 2, 0.01},
		{0, 0, 0.01, 0.03, 0, -0.5, 0.5, 0.01},    // zero radial spacing
		{0, 0, 0.01, 0.03, 1e-3, 0.5, -0.5, 0.01}, // end before start
	} {
		if _, err := recon.NewSector(a[0], a[1], a[2], a[3], a[4], a[5], a[6], a[7]); err == nil {
			t.Errorf("NewSector%v: no error", a)
		}
	}
}

func TestPoints(t *testing.T) {
	t.Parallel()
	px, pz := []float64{0, 1e-3, -2e-3}, []float64{0.01, 0.02, 0.03}
	g, err := recon.Points(px, pz)
	if err != nil {
		t.Fatal(err)
	}
	px[0] = 99 // the grid keeps its own copy
	if g.Rows != 1 || g.Cols != 3 || g.Len() != 3 || g.PX[0] != 0 || g.PZ[2] != 0.03 {
		t.Errorf("Points: %+v", g)
	}
}

// TestNewSector: pixel (i, j) sits at origin + R_i (sin(Theta_j), cos(Theta_j)),
// angles measured from +z towards +x (derived from the Grid doc).
func TestNewSector(t *testing.T) {
	t.Parallel()
	ox, oz := 0.001, -0.01
	g, err := recon.NewSector(ox, oz, 0.01, 0.04, 1e-3, -math.Pi/6, math.Pi/6, math.Pi/60)
	if err != nil {
		t.Fatal(err)
	}
	if g.Kind != recon.Sector || g.Rows != 31 || g.Cols != 21 {
		t.Fatalf("sector %d x %d, want 31 x 21", g.Rows, g.Cols)
	}
	for i := range g.Rows {
		for j := range g.Cols {
			r, th := g.R[i], g.Theta[j]
			x, z := ox+r*math.Sin(th), oz+r*math.Cos(th)
			k := i*g.Cols + j
			if math.Abs(g.PX[k]-x) > 1e-15 || math.Abs(g.PZ[k]-z) > 1e-15 {
				t.Fatalf("pixel (%d, %d) at (%g, %g), want (%g, %g)", i, j, g.PX[k], g.PZ[k], x, z)
			}
		}
	}
	// the middle column points straight down
	if mid := g.Theta[10]; math.Abs(mid) > 1e-15 || g.PX[10] != ox {
		t.Errorf("middle angle %g, x %g", mid, g.PX[10])
	}
}

// TestToRectRect: on a rectangular grid ToRect returns the values at the
// pixel centres, interpolates bilinearly between them and leaves points
// outside NaN.
func TestToRectRect(t *testing.T) {
	t.Parallel()
	g, err := recon.NewRect(0, 3e-3, 1e-3, 0.01, 0.012, 1e-3)
	if err != nil {
		t.Fatal(err)
	}
	vals := make([]float64, g.Len())
	for i := range vals {
		vals[i] = 2*g.PX[i]*1e3 + 3*g.PZ[i]*1e3 + g.PX[i]*g.PZ[i]*1e6 // bilinear in x, z
	}
	xs := []float64{0, 0.5e-3, 2.25e-3, 3e-3, 3.5e-3}
	zs := []float64{0.01, 0.0117, 0.012, 0.009}
	out := recon.ToRect(vals, &g, xs, zs)
	for r, z := range zs {
		for c, x := range xs {
			v := out[r*len(xs)+c]
			inside := x <= 3e-3 && z >= 0.01
			if !inside {
				if !math.IsNaN(v) {
					t.Errorf("(%g, %g) mm outside the grid: %g, want NaN", x*1e3, z*1e3, v)
				}
				continue
			}
			want := 2*x*1e3 + 3*z*1e3 + x*z*1e6 // bilinear interpolation is exact for it
			if math.Abs(v-want) > 1e-9 {
				t.Errorf("(%g, %g) mm: %g, want %g", x*1e3, z*1e3, v, want)
			}
		}
	}
}

// TestToRectSector: scan conversion of a sector grid puts each pixel back
// where it was: sampled at a pixel's own position the raster returns that
// pixel's value; a single bright pixel lands on the raster point nearest its
// position; a function bilinear in (radius, angle) is reproduced anywhere
// inside; points outside the sector are NaN.
func TestToRectSector(t *testing.T) {
	t.Parallel()
	ox, oz := 0.0, -0.005
	g, err := recon.NewSector(ox, oz, 0.01, 0.03, 0.5e-3, -0.5, 0.5, 0.025)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	vals := make([]float64, g.Len())
	for i := range vals {
		vals[i] = rng.Float64()
	}
	const tol = 1e-9 // rounding of the fractional index (ToRect's own slack is 1e-9 of an index)
	for n := 0; n < 200; n++ {
		k := rng.IntN(g.Len())
		v := recon.ToRect(vals, &g, []float64{g.PX[k]}, []float64{g.PZ[k]})[0]
		if math.Abs(v-vals[k]) > tol {
			t.Fatalf("pixel %d sampled at its own position: %g, want %g", k, v, vals[k])
		}
	}

	// one bright pixel on a 0.05 mm raster
	k := 17*g.Cols + 23
	one := make([]float64, g.Len())
	one[k] = 1
	d := 0.05e-3
	var xs, zs []float64
	for x := g.PX[k] - 1e-3; x <= g.PX[k]+1e-3; x += d {
		xs = append(xs, x)
	}
	for z := g.PZ[k] - 1e-3; z <= g.PZ[k]+1e-3; z += d {
		zs = append(zs, z)
	}
	out := recon.ToRect(one, &g, xs, zs)
	best := 0
	for i, v := range out {
		if v > out[best] {
			best = i
		}
	}
	bx, bz := xs[best%len(xs)], zs[best/len(xs)]
	if math.Abs(bx-g.PX[k]) > d/2+1e-12 || math.Abs(bz-g.PZ[k]) > d/2+1e-12 {
		t.Errorf("bright pixel at (%.3f, %.3f) mm comes back at (%.3f, %.3f) mm", g.PX[k]*1e3, g.PZ[k]*1e3, bx*1e3, bz*1e3)
	}

	// f(r, theta) = 1 + 2 r/mm + 3 theta + r/mm * theta, bilinear in (r, theta)
	f := func(r, th float64) float64 { return 1 + 2*r*1e3 + 3*th + r*1e3*th }
	lin := make([]float64, g.Len())
	for i := range g.Rows {
		for j := range g.Cols {
			lin[i*g.Cols+j] = f(g.R[i], g.Theta[j])
		}
	}
	xs = []float64{-0.004, 0.0013, 0.007, 0.02}
	zs = []float64{0.006, 0.0111, 0.02}
	out = recon.ToRect(lin, &g, xs, zs)
	inside := 0
	for r, z := range zs {
		for c, x := range xs {
			rad, th := math.Hypot(x-ox, z-oz), math.Atan2(x-ox, z-oz)
			v := out[r*len(xs)+c]
			in := rad >= 0.01 && rad <= 0.03 && math.Abs(th) <= 0.5
			switch {
			case !in && !math.IsNaN(v):
				t.Errorf("(%g, %g) mm is outside the sector: %g, want NaN", x*1e3, z*1e3, v)
			case in && math.Abs(v-f(rad, th)) > 1e-9:
				t.Errorf("(%g, %g) mm: %g, want %g", x*1e3, z*1e3, v, f(rad, th))
			}
			if in {
				inside++
			}
		}
	}
	if inside < 4 {
		t.Errorf("only %d test points inside the sector", inside)
	}
}
