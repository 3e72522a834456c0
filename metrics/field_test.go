package metrics

import (
	"math"
	"strings"
	"testing"
)

// axis returns n pixel centres start, start+step, ...
func axis(start, step float64, n int) []float64 {
	a := make([]float64, n)
	for i := range a {
		a[i] = start + float64(i)*step
	}
	return a
}

// fieldOf samples fn on the grid.
func fieldOf(x, z []float64, fn func(x, z float64) float64) *Field {
	f := &Field{X: x, Z: z, V: make([]float64, len(x)*len(z))}
	for iz, zz := range z {
		for ix, xx := range x {
			f.V[iz*len(x)+ix] = fn(xx, zz)
		}
	}
	return f
}

func TestFieldValidate(t *testing.T) {
	t.Parallel()
	good := axis(-1e-3, 1e-4, 21)
	tests := []struct {
		name string
		f    *Field
		want string // substring of the error; "" for valid
	}{
		{"valid", &Field{X: good, Z: axis(0.01, 5e-5, 4), V: make([]float64, 21*4)}, ""},
		{"nil", nil, "nil"},
		{"one column", &Field{X: []float64{0}, Z: good, V: make([]float64, 21)}, "x axis has 1"},
		{"decreasing", &Field{X: axis(0, -1e-4, 3), Z: good, V: make([]float64, 63)}, "must increase"},
		{"not uniform", &Field{X: []float64{0, 1e-4, 3e-4}, Z: good, V: make([]float64, 63)}, "not uniform"},
		{"nan axis", &Field{X: []float64{0, math.NaN(), 2e-4}, Z: good, V: make([]float64, 63)}, "not finite"},
		{"short values", &Field{X: good, Z: good, V: make([]float64, 20)}, "want len(X)*len(Z)"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			err := tc.f.Validate()
			switch {
			case tc.want == "" && err != nil:
				t.Fatalf("Validate: %v", err)
			case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)):
				t.Fatalf("Validate = %v, want an error containing %q", err, tc.want)
			}
		})
	}
}

func TestFieldAtAndBilinear(t *testing.T) {
	t.Parallel()
	// Bilinear interpolation reproduces a + b x + c z + d x z exactly (derived:
	// the interpolant is the unique bilinear function through the four nodes).
	const exactTol = 1e-12 // rounding only
	lin := func(x, z float64) float64 { return 1 + 2e3*x - 3e2*z + 4e5*x*z }
	f := fieldOf(axis(-2e-3, 2e-4, 21), axis(0.02, 1e-4, 11), lin)
	if got, want := f.At(3, 5), lin(f.X[3], f.Z[5]); got != want {
		t.Errorf("At(3, 5) = %g, want %g", got, want)
	}
	tests := []struct {
		name string
		x, z float64
		nan  bool
	}{
		{"node", f.X[4], f.Z[2], false},
		{"inside", 0.37e-3, 0.02043, false},
		{"first corner", f.X[0], f.Z[0], false},
		{"last corner", f.X[20], f.Z[10], false},
		{"last corner rounding", -2e-3 + 20*2e-4*(1+1e-15), f.Z[10], false},
		{"left of grid", f.X[0] - 1e-5, 0.0205, true},
		{"below grid", 0, f.Z[10] + 1e-5, true},
		{"nan", math.NaN(), 0.0205, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			got := f.Bilinear(tc.x, tc.z)
			if tc.nan {
				if !math.IsNaN(got) {
					t.Fatalf("Bilinear(%g, %g) = %g, want NaN outside the grid", tc.x, tc.z, got)
				}
				return
			}
			if want := lin(tc.x, tc.z); math.Abs(got-want) > exactTol*math.Max(1, math.Abs(want)) {
				t.Fatalf("Bilinear(%g, %g) = %.15g, want %.15g", tc.x, tc.z, got, want)
			}
		})
	}
}

func TestFieldAtPanics(t *testing.T) {
	t.Parallel()
	f := fieldOf(axis(0, 1, 3), axis(0, 1, 2), func(x, z float64) float64 { return 0 })
	defer func() {
		if r := recover(); r == nil || !strings.HasPrefix(r.(string), "metrics: ") {
			t.Fatalf("At out of range: recovered %v, want a metrics panic", r)
		}
	}()
	f.At(3, 0)
}
