package metrics

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"celerity/internal/strictyaml"
)

func TestRegionContains(t *testing.T) {
	t.Parallel()
	c := Circle{CX: 1e-3, CZ: 30e-3, R: 2e-3}
	r := Rect{X0: -1e-3, X1: 1e-3, Z0: 20e-3, Z1: 25e-3}
	a := Annulus{CX: 0, CZ: 30e-3, RIn: 3e-3, ROut: 5e-3}
	d := Difference{Base: a, Holes: []Region{Circle{CX: 4e-3, CZ: 30e-3, R: 0.5e-3}}}
	tests := []struct {
		name string
		r    Region
		x, z float64
		want bool
	}{
		{"circle centre", c, 1e-3, 30e-3, true},
		{"circle inside", c, 2.9e-3, 30e-3, true},
		{"circle outside", c, 3.1e-3, 30e-3, false},
		{"rect inside", r, 0, 22e-3, true},
		{"rect corner", r, 1e-3, 25e-3, true},
		{"rect outside", r, 0, 26e-3, false},
		{"annulus hole", a, 0, 30e-3, false},
		{"annulus ring", a, 0, 34e-3, true},
		{"annulus beyond", a, 0, 35.1e-3, false},
		{"difference ring", d, -4e-3, 30e-3, true},
		{"difference hole", d, 4e-3, 30e-3, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			if got := tc.r.Contains(tc.x, tc.z); got != tc.want {
				t.Fatalf("%v.Contains(%g, %g) = %v, want %v", tc.r, tc.x, tc.z, got, tc.want)
			}
		})
	}
}

func TestSamples(t *testing.T) {
	t.Parallel()
	const dx, dz = 1e-4, 1e-4
	f := fieldOf(axis(-5e-3, dx, 101), axis(25e-3, dz, 101), func(x, z float64) float64 { return x })
	tests := []struct {
		name   string
		r      Region
		want   float64 // pixel count
		relTol float64
	}{
		// Pixel centres in [-1, 1] x [27, 28] mm: 21 x 11, exact.
		{"rect", Rect{X0: -1e-3, X1: 1e-3, Z0: 27e-3, Z1: 28e-3}, 21 * 11, 0},
		// Area / pixel area, derived; counting error on the rim ~ perimeter/pixel
		// over area: 2/(R/dx) = 1 % here, so 2 %.
		{"circle", Circle{CX: 0.013e-3, CZ: 30.041e-3, R: 2e-3}, math.Pi * 4e-6 / (dx * dz), 0.02},
		{"annulus", Annulus{CX: 0, CZ: 30e-3, RIn: 2e-3, ROut: 4e-3}, math.Pi * 12e-6 / (dx * dz), 0.02},
		{"off the image", Circle{CX: 20e-3, CZ: 30e-3, R: 1e-3}, 0, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			s := Samples(f, tc.r)
			if got := float64(len(s)); math.Abs(got-tc.want) > tc.relTol*tc.want {
				t.Fatalf("Samples(%v) has %d pixels, want %.1f", tc.r, len(s), tc.want)
			}
			// Bounded and unbounded scans agree.
			all := Samples(f, struct{ Region }{tc.r})
			if len(all) != len(s) {
				t.Fatalf("bounded scan found %d pixels, full scan %d", len(s), len(all))
			}
		})
	}
}

func TestParseRegion(t *testing.T) {
	t.Parallel()
	tests := []struct {
		in   string
		want Region
		err  string // substring of the error, or "" for success
	}{
		{"circle:0,35,4", Circle{CX: 0, CZ: 35e-3, R: 4e-3}, ""},
		{" rect: -5, 5, 20.5, 30 ", Rect{X0: -5e-3, X1: 5e-3, Z0: 20.5e-3, Z1: 30e-3}, ""},
		{"annulus:1,35,0,8", Annulus{CX: 1e-3, CZ: 35e-3, RIn: 0, ROut: 8e-3}, ""},
		{"circle 0,35,4", nil, "want kind:numbers"},
		{"square:0,35,4", nil, `unknown kind "square"`},
		{"circle:0,35", nil, "circle needs 3 numbers x,z,r (mm), got 2"},
		{"rect:0,1,2,3,4", nil, "rect needs 4 numbers"},
		{"circle:0,abc,4", nil, `circle z: "abc" is not a finite number`},
		{"circle:0,35,NaN", nil, `circle r: "NaN" is not a finite number`},
		{"circle:0,35,-4", nil, "circle r: radius must be positive"},
		{"rect:5,-5,20,30", nil, "rect x1: must exceed x0"},
		{"rect:-5,5,30,30", nil, "rect z1: must exceed z0"},
		{"annulus:0,35,8,5", nil, "annulus rout: must exceed rin"},
		{"annulus:0,35,-1,5", nil, "annulus rin: must not be negative"},
	}
	for _, tc := range tests {
		t.Run(tc.in, func(t *testing.T) {
			t.Parallel()
			got, err := ParseRegion(tc.in)
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("ParseRegion(%q) error = %v, want one containing %q", tc.in, err, tc.err)
				}
				if !strings.Contains(err.Error(), tc.in) {
					t.Fatalf("error %q does not quote the flag", err)
				}
				return
			}
			if err != nil {
				t.Fatalf("ParseRegion(%q): %v", tc.in, err)
			}
			if got != tc.want {
				t.Fatalf("ParseRegion(%q) = %#v, want %#v", tc.in, got, tc.want)
			}
			// String gives the flag back, and it parses to the same region.
			back, err := ParseRegion(got.String())
			if err != nil || back != got {
				t.Fatalf("round trip via %q: %#v, %v", got.String(), back, err)
			}
		})
	}
}

func TestRegionString(t *testing.T) {
	t.Parallel()
	if got, want := (Circle{CX: 0, CZ: 0.035, R: 0.004}).String(), "circle:0,35,4"; got != want {
		t.Errorf("String = %q, want %q", got, want)
	}
	if got, want := (Annulus{CX: -0.0012, CZ: 0.035, RIn: 0.0048, ROut: 0.0088}).String(), "annulus:-1.2,35,4.8,8.8"; got != want {
		t.Errorf("String = %q, want %q", got, want)
	}
}

func writeFile(t *testing.T, name, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestLoadRegions(t *testing.T) {
	t.Parallel()
	p := writeFile(t, "regions.yaml", `# contrast regions
pairs:
  - {name: cyst, inside: {circle_mm: [0, 35, 4]}, outside: {annulus_mm: [0, 35, 5, 8]}}
  - name: deep
    inside: {rect_mm: [-3, 3, 50, 54]}
    outside:
      rect_mm: [6, 12, 50, 54]
`)
	got, err := LoadRegions(p)
	if err != nil {
		t.Fatal(err)
	}
	want := []RegionPair{
		{Name: "cyst", Inside: Circle{CX: 0, CZ: 35e-3, R: 4e-3}, Outside: Annulus{CX: 0, CZ: 35e-3, RIn: 5e-3, ROut: 8e-3}},
		{Name: "deep", Inside: Rect{X0: -3e-3, X1: 3e-3, Z0: 50e-3, Z1: 54e-3}, Outside: Rect{X0: 6e-3, X1: 12e-3, Z0: 50e-3, Z1: 54e-3}},
	}
	if len(got) != len(want) {
		t.Fatalf("LoadRegions = %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("pair %d = %#v, want %#v", i, got[i], want[i])
		}
	}
}

func TestLoadRegionsErrors(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name, text string
		field      string // dotted field the error must name
		line       int
		msg        string
	}{
		{"unknown region key", "pairs:\n  - name: cyst\n    inside: {circle_m: [0, 35, 4]}\n    outside: {annulus_mm: [0, 35, 5, 8]}\n",
			"pairs[0].inside.circle_m", 3, "unknown key"},
		{"unknown pair key", "pairs:\n  - name: cyst\n    inside: {circle_mm: [0, 35, 4]}\n    outside: {annulus_mm: [0, 35, 5, 8]}\n    colour: red\n",
			"pairs[0].colour", 5, "unknown key"},
		{"unknown top key", "pairs:\n  - {name: a, inside: {circle_mm: [0, 35, 4]}, outside: {annulus_mm: [0, 35, 5, 8]}}\nunits: mm\n",
			"units", 3, "unknown key"},
		{"bad number", "pairs:\n  - name: cyst\n    inside: {circle_mm: [0, abc, 4]}\n    outside: {annulus_mm: [0, 35, 5, 8]}\n",
			"pairs[0].inside.circle_mm[1]", 3, "expected a number"},
		{"infinite number", "pairs:\n  - name: cyst\n    inside: {circle_mm: [0, 35, 4]}\n    outside:\n      annulus_mm: [0, 35, 5, .inf]\n",
			"pairs[0].outside.annulus_mm[3]", 5, "must be finite"},
		{"wrong count", "pairs:\n  - name: cyst\n    inside: {rect_mm: [0, 35, 4]}\n    outside: {annulus_mm: [0, 35, 5, 8]}\n",
			"pairs[0].inside.rect_mm", 3, "needs 4 numbers [x0, x1, z0, z1] (mm), got 3"},
		{"negative radius", "pairs:\n  - name: cyst\n    inside: {circle_mm: [0, 35, -4]}\n    outside: {annulus_mm: [0, 35, 5, 8]}\n",
			"pairs[0].inside.circle_mm", 3, "r: radius must be positive"},
		{"two kinds", "pairs:\n  - name: cyst\n    inside: {circle_mm: [0, 35, 4], rect_mm: [0, 1, 2, 3]}\n    outside: {annulus_mm: [0, 35, 5, 8]}\n",
			"pairs[0].inside", 3, "give exactly one region"},
		{"no kind", "pairs:\n  - name: cyst\n    inside: {}\n    outside: {annulus_mm: [0, 35, 5, 8]}\n",
			"pairs[0].inside", 3, "needs one of"},
		{"missing outside", "pairs:\n  - name: cyst\n    inside: {circle_mm: [0, 35, 4]}\n",
			"pairs[0].outside", 2, "required key is missing"},
		{"repeated name", "pairs:\n  - {name: a, inside: {circle_mm: [0, 35, 4]}, outside: {annulus_mm: [0, 35, 5, 8]}}\n  - {name: a, inside: {circle_mm: [0, 45, 4]}, outside: {annulus_mm: [0, 45, 5, 8]}}\n",
			"pairs[1].name", 3, "earlier pair"},
		{"empty list", "pairs: []\n", "pairs", 1, "no region pairs"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			p := writeFile(t, "regions.yaml", tc.text)
			_, err := LoadRegions(p)
			var se *strictyaml.Error
			if !errors.As(err, &se) {
				t.Fatalf("LoadRegions error = %v (%T), want a *strictyaml.Error", err, err)
			}
			if se.File != p || se.Field != tc.field || se.Line != tc.line || !strings.Contains(se.Msg, tc.msg) {
				t.Fatalf("error = %q\nwant file %s, field %s, line %d, message containing %q", err, p, tc.field, tc.line, tc.msg)
			}
			// The printed message carries all three.
			for _, part := range []string{p, tc.field, "line"} {
				if !strings.Contains(err.Error(), part) {
					t.Fatalf("error %q does not mention %q", err, part)
				}
			}
		})
	}
}

func TestLoadRegionsMissingFile(t *testing.T) {
	t.Parallel()
	p := filepath.Join(t.TempDir(), "none.yaml")
	if _, err := LoadRegions(p); err == nil || !strings.Contains(err.Error(), p) {
		t.Fatalf("LoadRegions(missing) = %v, want an error naming %s", err, p)
	}
}

func TestPairsFromInclusions(t *testing.T) {
	t.Parallel()
	centres := [][2]float64{{0, 30e-3}, {0, 37e-3}, {15e-3, 30e-3}}
	radii := []float64{3e-3, 1e-3, 2e-3}
	pairs := PairsFromInclusions(centres, radii)
	// Regions are compared by their String (mm to 12 digits): 0.8 * 3e-3 and
	// 2.4e-3 differ in the last bit.
	tests := []struct{ name, inside, outside string }{
		// r = 3 mm, band max(3, 2) = 3 mm: annulus 3.6 to 6.6 mm; the 1 mm
		// inclusion 7 mm away is within 6.6 + 1.2 mm, so a 1.2 mm disc is cut out.
		{"inclusion1", "circle:0,30,2.4", "annulus:0,30,3.6,6.6 minus circle:0,37,1.2"},
		// r = 1 mm, band is the 2 mm floor: 1.2 to 3.2 mm; 7 mm > 3.2 + 3.6 mm.
		{"inclusion2", "circle:0,37,0.8", "annulus:0,37,1.2,3.2"},
		// r = 2 mm: 2.4 to 4.4 mm, far from the others.
		{"inclusion3", "circle:15,30,1.6", "annulus:15,30,2.4,4.4"},
	}
	if len(pairs) != len(tests) {
		t.Fatalf("%d pairs, want %d", len(pairs), len(tests))
	}
	for i, tc := range tests {
		p := pairs[i]
		if p.Name != tc.name || p.Inside.String() != tc.inside || p.Outside.String() != tc.outside {
			t.Errorf("pair %d = {%s, %s, %s}, want {%s, %s, %s}", i, p.Name, p.Inside, p.Outside, tc.name, tc.inside, tc.outside)
		}
	}
	// No background pixel of any pair lies in another inclusion.
	for i, p := range pairs {
		for j, c := range centres {
			if j != i && p.Outside.Contains(c[0], c[1]+radii[j]*0.99) {
				t.Errorf("pair %d background reaches into inclusion %d", i, j)
			}
		}
	}
}
