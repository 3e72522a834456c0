package metrics

import (
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"celerity/internal/strictyaml"
)

// Region is a set of points in the image plane (x lateral, z depth, m).
type Region interface {
	Contains(x, z float64) bool
	// String gives the region in the flag syntax of ParseRegion (mm).
	String() string
}

// bounded regions report a bounding box (m), which lets Samples visit only
// the pixels that can be inside.
type bounded interface {
	Bounds() (x0, x1, z0, z1 float64)
}

// Circle is the closed disc of radius R (m) around (CX, CZ) (m).
type Circle struct{ CX, CZ, R float64 }

// Contains reports whether (x - CX)^2 + (z - CZ)^2 <= R^2.
func (c Circle) Contains(x, z float64) bool {
	dx, dz := x-c.CX, z-c.CZ
	return dx*dx+dz*dz <= c.R*c.R
}

// Bounds returns the bounding box of the circle (m).
func (c Circle) Bounds() (x0, x1, z0, z1 float64) {
	return c.CX - c.R, c.CX + c.R, c.CZ - c.R, c.CZ + c.R
}

func (c Circle) String() string { return "circle:" + mmList(c.CX, c.CZ, c.R) }

// Rect is the closed rectangle X0 <= x <= X1, Z0 <= z <= Z1 (m).
type Rect struct{ X0, X1, Z0, Z1 float64 }

// Contains reports whether (x, z) lies in the rectangle.
func (r Rect) Contains(x, z float64) bool {
	return x >= r.X0 && x <= r.X1 && z >= r.Z0 && z <= r.Z1
}

// Bounds returns the rectangle itself (m).
func (r Rect) Bounds() (x0, x1, z0, z1 float64) { return r.X0, r.X1, r.Z0, r.Z1 }

func (r Rect) String() string { return "rect:" + mmList(r.X0, r.X1, r.Z0, r.Z1) }

// Annulus is the closed ring RIn <= distance <= ROut (m) around (CX, CZ) (m).
type Annulus struct{ CX, CZ, RIn, ROut float64 }

// Contains reports whether RIn^2 <= (x - CX)^2 + (z - CZ)^2 <= ROut^2.
func (a Annulus) Contains(x, z float64) bool {
	dx, dz := x-a.CX, z-a.CZ
	d2 := dx*dx + dz*dz
	return d2 >= a.RIn*a.RIn && d2 <= a.ROut*a.ROut
}

// Bounds returns the bounding box of the outer circle (m).
func (a Annulus) Bounds() (x0, x1, z0, z1 float64) {
	return a.CX - a.ROut, a.CX + a.ROut, a.CZ - a.ROut, a.CZ + a.ROut
}

func (a Annulus) String() string { return "annulus:" + mmList(a.CX, a.CZ, a.RIn, a.ROut) }

// Difference is the part of Base outside every hole. PairsFromInclusions uses
// it to keep neighbouring inclusions out of a background annulus. Its String
// joins the parts with " minus " and is not accepted by ParseRegion.
type Difference struct {
	Base  Region
	Holes []Region
}

// Contains reports whether (x, z) is in Base and in no hole.
func (d Difference) Contains(x, z float64) bool {
	if !d.Base.Contains(x, z) {
		return false
	}
	for _, h := range d.Holes {
		if h.Contains(x, z) {
			return false
		}
	}
	return true
}

// Bounds returns the bounds of Base, or an infinite box when Base has none.
func (d Difference) Bounds() (x0, x1, z0, z1 float64) {
	if b, ok := d.Base.(bounded); ok {
		return b.Bounds()
	}
	inf := math.Inf(1)
	return -inf, inf, -inf, inf
}

func (d Difference) String() string {
	var b strings.Builder
	b.WriteString(d.Base.String())
	for _, h := range d.Holes {
		b.WriteString(" minus ")
		b.WriteString(h.String())
	}
	return b.String()
}

// mmList formats metre values as comma-separated mm with the shortest
// representation that is not polluted by the m-to-mm rounding.
func mmList(v ...float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = strconv.FormatFloat(roundMM(x*1e3), 'g', -1, 64)
	}
	return strings.Join(s, ",")
}

// roundMM removes the rounding residue of a mm value computed from m
// (0.035 m * 1e3 = 35.00000000000001) by rounding to 12 significant digits.
func roundMM(v float64) float64 {
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 12, 64), 64)
	if err != nil {
		return v
	}
	return r
}

// Samples returns the field values of the pixels whose centres lie inside r,
// row by row (increasing z, then increasing x). f must be valid (see
// Field.Validate).
func Samples(f *Field, r Region) []float64 {
	nx, nz := len(f.X), len(f.Z)
	ix0, ix1, iz0, iz1 := 0, nx-1, 0, nz-1
	if b, ok := r.(bounded); ok {
		x0, x1, z0, z1 := b.Bounds()
		var okx, okz bool
		ix0, ix1, okx = indexRange(x0, x1, f.X[0], f.Dx(), nx)
		iz0, iz1, okz = indexRange(z0, z1, f.Z[0], f.Dz(), nz)
		if !okx || !okz {
			return nil
		}
	}
	var out []float64
	for iz := iz0; iz <= iz1; iz++ {
		z := f.Z[iz]
		row := f.V[iz*nx : (iz+1)*nx]
		for ix := ix0; ix <= ix1; ix++ {
			if r.Contains(f.X[ix], z) {
				out = append(out, row[ix])
			}
		}
	}
	return out
}

// ParseRegion parses a region flag in mm:
//
//	circle:x,z,r           centre (x, z) and radius r
//	rect:x0,x1,z0,z1       x0 < x1, z0 < z1
//	annulus:x,z,rin,rout   0 <= rin < rout
//
// Spaces around the numbers are allowed. The region is returned in m.
func ParseRegion(s string) (Region, error) {
	kind, rest, found := strings.Cut(strings.TrimSpace(s), ":")
	if !found {
		return nil, fmt.Errorf("region %q: want kind:numbers, e.g. circle:0,35,4 (mm)", s)
	}
	kind = strings.TrimSpace(kind)
	names, ok := regionFields[kind]
	if !ok {
		return nil, fmt.Errorf("region %q: unknown kind %q (want circle, rect or annulus)", s, kind)
	}
	parts := strings.Split(rest, ",")
	if len(parts) != len(names) {
		return nil, fmt.Errorf("region %q: %s needs %d numbers %s (mm), got %d", s, kind, len(names), strings.Join(names, ","), len(parts))
	}
	v := make([]float64, len(parts))
	for i, p := range parts {
		x, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, fmt.Errorf("region %q: %s %s: %q is not a finite number", s, kind, names[i], strings.TrimSpace(p))
		}
		v[i] = x
	}
	r, field, msg := buildRegion(kind, v)
	if msg != "" {
		return nil, fmt.Errorf("region %q: %s %s: %s", s, kind, field, msg)
	}
	return r, nil
}

// regionFields names the numbers of each region kind, in flag order (mm).
var regionFields = map[string][]string{
	"circle":  {"x", "z", "r"},
	"rect":    {"x0", "x1", "z0", "z1"},
	"annulus": {"x", "z", "rin", "rout"},
}

// buildRegion makes a region from numbers in mm; on a geometric problem it
// returns the offending number's name and a message.
func buildRegion(kind string, mm []float64) (r Region, field, msg string) {
	v := make([]float64, len(mm))
	for i, x := range mm {
		v[i] = x / 1e3
	}
	switch kind {
	case "circle":
		if !(v[2] > 0) {
			return nil, "r", fmt.Sprintf("radius must be positive, got %g mm", mm[2])
		}
		return Circle{CX: v[0], CZ: v[1], R: v[2]}, "", ""
	case "rect":
		if !(v[0] < v[1]) {
			return nil, "x1", fmt.Sprintf("must exceed x0 (%g mm), got %g mm", mm[0], mm[1])
		}
		if !(v[2] < v[3]) {
			return nil, "z1", fmt.Sprintf("must exceed z0 (%g mm), got %g mm", mm[2], mm[3])
		}
		return Rect{X0: v[0], X1: v[1], Z0: v[2], Z1: v[3]}, "", ""
	case "annulus":
		if !(v[2] >= 0) {
			return nil, "rin", fmt.Sprintf("must not be negative, got %g mm", mm[2])
		}
		if !(v[3] > v[2]) {
			return nil, "rout", fmt.Sprintf("must exceed rin (%g mm), got %g mm", mm[2], mm[3])
		}
		return Annulus{CX: v[0], CZ: v[1], RIn: v[2], ROut: v[3]}, "", ""
	}
	return nil, "", "unknown kind " + kind
}

// RegionPair is a named inside/outside pair for contrast metrics (e.g. a cyst
// and its background annulus).
type RegionPair struct {
	Name    string
	Inside  Region
	Outside Region
}

// maxRegionFileBytes bounds a region file; a list of regions is a few kB.
const maxRegionFileBytes = 1 << 20

// LoadRegions reads a YAML file of region pairs. The root is a mapping with
// one key, pairs, a list of pairs; each pair has a name and an inside and an
// outside region, and each region has exactly one of these keys (numbers in
// mm, as the suffix says):
//
//	circle_mm:  [x, z, r]
//	rect_mm:    [x0, x1, z0, z1]
//	annulus_mm: [x, z, rin, rout]
//
// Example:
//
//	pairs:
//	  - {name: cyst, inside: {circle_mm: [0, 35, 4]}, outside: {annulus_mm: [0, 35, 5, 8]}}
//	  - name: deep
//	    inside: {rect_mm: [-3, 3, 50, 54]}
//	    outside: {rect_mm: [6, 12, 50, 54]}
//
// Unknown or missing keys, numbers that are not finite, lists of the wrong
// length, impossible geometry (a non-positive radius, rin >= rout, x0 >= x1),
// empty or repeated names and an empty list are errors; each is a
// *strictyaml.Error naming the file, the field (e.g. pairs[0].inside.circle_mm)
// and the line.
func LoadRegions(path string) ([]RegionPair, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	data, err := io.ReadAll(io.LimitReader(fh, maxRegionFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(data) > maxRegionFileBytes {
		return nil, &strictyaml.Error{File: path, Msg: fmt.Sprintf("file is over the %d-byte limit for region files", maxRegionFileBytes)}
	}
	root, err := strictyaml.Parse(path, data)
	if err != nil {
		return nil, err
	}
	items, err := root.Maps("pairs", true)
	if err != nil {
		return nil, err
	}
	if err := root.Done(); err != nil {
		return nil, err
	}
	if len(items) == 0 {
		return nil, root.Errorf("pairs", "lists no region pairs")
	}
	pairs := make([]RegionPair, 0, len(items))
	seen := map[string]bool{}
	for _, it := range items {
		name, err := it.String("name")
		if err != nil {
			return nil, err
		}
		if strings.TrimSpace(name) == "" {
			return nil, it.Errorf("name", "must not be empty")
		}
		if seen[name] {
			return nil, it.Errorf("name", "%q names an earlier pair too", name)
		}
		seen[name] = true
		in, err := yamlRegion(it, "inside")
		if err != nil {
			return nil, err
		}
		out, err := yamlRegion(it, "outside")
		if err != nil {
			return nil, err
		}
		if err := it.Done(); err != nil {
			return nil, err
		}
		pairs = append(pairs, RegionPair{Name: name, Inside: in, Outside: out})
	}
	return pairs, nil
}

// yamlKinds maps region keys of region files to ParseRegion kinds.
var yamlKinds = [...]struct{ key, kind string }{
	{"circle_mm", "circle"},
	{"rect_mm", "rect"},
	{"annulus_mm", "annulus"},
}

func yamlRegion(parent *strictyaml.Map, key string) (Region, error) {
	m, err := parent.Map(key)
	if err != nil {
		return nil, err
	}
	var (
		r     Region
		found []string
	)
	for _, k := range yamlKinds {
		if !m.Has(k.key) {
			continue
		}
		v, err := m.Floats(k.key, true)
		if err != nil {
			return nil, err
		}
		found = append(found, k.key)
		names := regionFields[k.kind]
		if len(v) != len(names) {
			return nil, m.Errorf(k.key, "needs %d numbers [%s] (mm), got %d", len(names), strings.Join(names, ", "), len(v))
		}
		reg, field, msg := buildRegion(k.kind, v)
		if msg != "" {
			return nil, m.Errorf(k.key, "%s: %s", field, msg)
		}
		r = reg
	}
	// Unknown keys first: a misspelt kind (circle: [...]) should be named as such.
	if err := m.Done(); err != nil {
		return nil, err
	}
	switch len(found) {
	case 0:
		return nil, m.Errorf("", "needs one of circle_mm, rect_mm, annulus_mm")
	case 1:
		return r, nil
	}
	return nil, m.Errorf("", "has %s; give exactly one region", strings.Join(found, " and "))
}

// Background geometry of PairsFromInclusions, as multiples of the inclusion
// radius r.
const (
	insideFrac    = 0.8  // inside circle radius
	gapFrac       = 1.2  // inner radius of the background annulus (and of holes cut for neighbours)
	minBandWidthM = 2e-3 // least radial width of the background annulus, m
)

// PairsFromInclusions builds one region pair per circular inclusion (centres
// (x, z) and radii in m), named "inclusion1", "inclusion2", ...:
//
//	inside  = circle of radius 0.8 r
//	outside = annulus from 1.2 r to 1.2 r + max(r, 2 mm)
//
// The margins of 0.2 r on either side of the edge keep the edge blur (about a
// resolution cell) out of both regions; a band of width r gives a background
// about 5 times the inside area, and the 2 mm floor keeps enough speckle cells
// in the background of small inclusions. Where another inclusion j comes
// within reach, a disc of radius 1.2 r_j around it is cut out of the
// background (the outside region is then a Difference).
//
// It panics when len(centres) != len(radii) or a radius is not positive.
func PairsFromInclusions(centres [][2]float64, radii []float64) []RegionPair {
	if len(centres) != len(radii) {
		panic(fmt.Sprintf("metrics: PairsFromInclusions: %d centres but %d radii", len(centres), len(radii)))
	}
	for i, r := range radii {
		if !(r > 0) || math.IsInf(r, 0) {
			panic(fmt.Sprintf("metrics: PairsFromInclusions: radius %d is %g, must be positive", i, r))
		}
	}
	pairs := make([]RegionPair, len(centres))
	for i, c := range centres {
		r := radii[i]
		ann := Annulus{CX: c[0], CZ: c[1], RIn: gapFrac * r, ROut: gapFrac*r + max(r, minBandWidthM)}
		var holes []Region
		for j, cj := range centres {
			if j == i {
				continue
			}
			hole := Circle{CX: cj[0], CZ: cj[1], R: gapFrac * radii[j]}
			if math.Hypot(cj[0]-c[0], cj[1]-c[1]) < ann.ROut+hole.R {
				holes = append(holes, hole)
			}
		}
		var out Region = ann
		if len(holes) > 0 {
			out = Difference{Base: ann, Holes: holes}
		}
		pairs[i] = RegionPair{
			Name:    fmt.Sprintf("inclusion%d", i+1),
			Inside:  Circle{CX: c[0], CZ: c[1], R: insideFrac * r},
			Outside: out,
		}
	}
	return pairs
}
