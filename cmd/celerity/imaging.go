package main

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"celerity/acq"
	"celerity/internal/atomicfile"
	"celerity/internal/dsp"
	"celerity/internal/npy"
	"celerity/recon"
	"celerity/report"
)

// imagingFlags are the beamforming options shared by commands that form images.
type imagingFlags struct {
	FNumber   float64 `help:"Receive F-number (0: whole array)." default:"1.5" name:"fnumber"`
	Window    string  `help:"Receive apodisation window: boxcar, hann or tukey[:alpha]." default:"hann"`
	Interp    string  `help:"Interpolation of channel data: linear or cubic." default:"linear" enum:"linear,cubic"`
	Grid      string  `help:"Pixel grid in mm: x0:x1:dx,z0:z1:dz (rectangular), e.g. --grid=-10:10:0.1,5:40:0.05 (write = before a leading minus sign), or sector:r0:r1:dr,th0:th1:dth (mm and degrees, from the array centre). Default: fitted to the probe and record." placeholder:"SPEC"`
	DynamicDB float64 `help:"Displayed dynamic range of B-mode images, dB." default:"60" name:"dynamic-range-db"`
}

func (f *imagingFlags) config() (recon.Config, error) {
	w, err := dsp.ParseWindow(f.Window)
	if err != nil {
		return recon.Config{}, fmt.Errorf("--window: %v", err)
	}
	in, err := recon.ParseInterp(f.Interp)
	if err != nil {
		return recon.Config{}, fmt.Errorf("--interp: %v", err)
	}
	if f.FNumber < 0 || math.IsNaN(f.FNumber) || f.FNumber > 100 {
		return recon.Config{}, fmt.Errorf("--fnumber: must be between 0 and 100, got %g", f.FNumber)
	}
	if !(f.DynamicDB > 0 && f.DynamicDB <= 300) {
		return recon.Config{}, fmt.Errorf("--dynamic-range-db: must be between 0 and 300, got %g", f.DynamicDB)
	}
	return recon.Config{FNumber: f.FNumber, Window: w, Interp: in}, nil
}

// grid returns the requested grid, or one fitted to the probe and record at speed c.
func (f *imagingFlags) grid(a *acq.Acquisition, c float64) (recon.Grid, error) {
	if f.Grid != "" {
		g, err := parseGrid(f.Grid)
		if err != nil {
			return recon.Grid{}, fmt.Errorf("--grid: %v", err)
		}
		return g, nil
	}
	return defaultGrid(a, c)
}

// parseGrid reads "x0:x1:dx,z0:z1:dz" (mm) or "sector:r0:r1:dr,th0:th1:dth" (mm, degrees).
func parseGrid(s string) (recon.Grid, error) {
	sector := strings.HasPrefix(s, "sector:")
	s = strings.TrimPrefix(s, "sector:")
	parts := strings.Split(s, ",")
	if len(parts) != 2 {
		return recon.Grid{}, fmt.Errorf("want two ranges separated by a comma, got %q", s)
	}
	var v [2][3]float64
	for i, p := range parts {
		f := strings.Split(p, ":")
		if len(f) != 3 {
			return recon.Grid{}, fmt.Errorf("range %q: want start:end:step", p)
		}
		for k, x := range f {
			n, err := strconv.ParseFloat(strings.TrimSpace(x), 64)
			if err != nil || math.IsNaN(n) || math.IsInf(n, 0) {
				return recon.Grid{}, fmt.Errorf("range %q: %q is not a number", p, x)
			}
			v[i][k] = n
		}
	}
	if sector {
		d := math.Pi / 180
		return recon.NewSector(0, 0, v[0][0]*1e-3, v[0][1]*1e-3, v[0][2]*1e-3, v[1][0]*d, v[1][1]*d, v[1][2]*d)
	}
	return recon.NewRect(v[0][0]*1e-3, v[0][1]*1e-3, v[0][2]*1e-3, v[1][0]*1e-3, v[1][1]*1e-3, v[1][2]*1e-3)
}

// defaultGrid covers the probe's field of view down to the end of the record:
// a rectangle under linear arrays with an aperture of 20 mm or more, a sector
// for convex arrays (from the centre of curvature) and small phased arrays.
// Pixels are a third of a wavelength wide and a quarter deep.
func defaultGrid(a *acq.Acquisition, c float64) (recon.Grid, error) {
	p := &a.Probe
	lam := c / p.CenterFrequencyHz
	zmax := c * (a.StartTimeS + a.Duration()) / 2
	zmin := math.Max(c*a.StartTimeS/2, 1e-3)
	switch {
	case p.Geometry == acq.Convex:
		half := float64(p.Count-1) * p.PitchM / p.RadiusM / 2
		return recon.NewSector(0, -p.RadiusM, p.RadiusM+zmin, p.RadiusM+zmax*0.95, lam/4, -half, half, lam/3/(p.RadiusM+zmax/2))
	case p.Aperture() < 0.02:
		half := 40 * math.Pi / 180
		return recon.NewSector(0, 0, zmin, zmax*0.95, lam/4, -half, half, lam/3/(zmax/2))
	}
	half := p.Aperture() / 2
	return recon.NewRect(-half, half, lam/3, zmin, zmax*0.95, lam/4)
}

// modelFlags select the delay model.
type modelFlags struct {
	SpeedMPS float64 `help:"Assumed speed of sound, m/s (a homogeneous medium)." name:"speed-mps" placeholder:"M/S"`
	Layers   string  `help:"Horizontal layers from the array face: thickness_mm:speed,...,speed (the last without thickness), e.g. 15:1450,1570." placeholder:"LIST"`
	Profile  string  `help:"Per-element arrival-time corrections in seconds: a .npy (float64, one per element) or a CSV with a profile_s column, as the aberration command writes." type:"existingfile" placeholder:"FILE"`
}

func (m *modelFlags) validate(required bool) error {
	if m.SpeedMPS != 0 && m.Layers != "" {
		return fmt.Errorf("give --speed-mps or --layers, not both")
	}
	if required && m.SpeedMPS == 0 && m.Layers == "" {
		return fmt.Errorf("give --speed-mps or --layers")
	}
	if m.SpeedMPS != 0 && !(m.SpeedMPS >= 300 && m.SpeedMPS <= 10000) {
		return fmt.Errorf("--speed-mps: must be between 300 and 10000 m/s, got %g", m.SpeedMPS)
	}
	return nil
}

// build returns the delay model for acquisition a.
func (m *modelFlags) build(a *acq.Acquisition) (recon.DelayModel, error) {
	els := a.Probe.Elements()
	var base recon.DelayModel
	if m.Layers != "" {
		layers, err := parseLayers(m.Layers)
		if err != nil {
			return nil, fmt.Errorf("--layers: %v", err)
		}
		l, err := recon.NewLayered(layers, els)
		if err != nil {
			return nil, fmt.Errorf("--layers: %v", err)
		}
		base = l
	} else {
		base = recon.NewHomogeneous(m.SpeedMPS, els)
	}
	if m.Profile == "" {
		return base, nil
	}
	prof, err := readProfile(m.Profile, len(els))
	if err != nil {
		return nil, err
	}
	c, err := recon.NewCorrectedField(base, prof, recon.FieldOf(&a.Probe))
	if err != nil {
		return nil, fmt.Errorf("%s: %v", m.Profile, err)
	}
	return c, nil
}

// parseLayers reads "15:1450,1570" into layers (thickness in mm).
func parseLayers(s string) ([]acq.Layer, error) {
	var out []acq.Layer
	parts := strings.Split(s, ",")
	for i, p := range parts {
		f := strings.Split(strings.TrimSpace(p), ":")
		last := i == len(parts)-1
		var l acq.Layer
		switch {
		case len(f) == 2 && !last:
			th, err1 := strconv.ParseFloat(f[0], 64)
			v, err2 := strconv.ParseFloat(f[1], 64)
			if err1 != nil || err2 != nil || !(th > 0) || math.IsInf(th, 0) {
				return nil, fmt.Errorf("layer %d %q: want thickness_mm:speed with a positive thickness", i, p)
			}
			l = acq.Layer{ThicknessM: th * 1e-3, SpeedMPS: v}
		case len(f) == 1 && last:
			v, err := strconv.ParseFloat(f[0], 64)
			if err != nil {
				return nil, fmt.Errorf("last layer %q: want a speed", p)
			}
			l = acq.Layer{SpeedMPS: v}
		default:
			return nil, fmt.Errorf("layer %d %q: every layer but the last is thickness_mm:speed, the last is a speed", i, p)
		}
		if !(l.SpeedMPS >= 300 && l.SpeedMPS <= 10000) {
			return nil, fmt.Errorf("layer %d: speed must be between 300 and 10000 m/s, got %g", i, l.SpeedMPS)
		}
		out = append(out, l)
	}
	return out, nil
}

// readProfile reads per-element corrections (s) from .npy or CSV.
func readProfile(path string, n int) ([]float64, error) {
	if strings.EqualFold(filepath.Ext(path), ".npy") {
		f, h, err := npy.Open(path, 1<<24)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", path, err)
		}
		defer f.Close()
		if h.DType != npy.Float64 || len(h.Shape) != 1 || h.Shape[0] != n {
			return nil, fmt.Errorf("%s: want float64 with shape (%d,), got %s %v", path, n, h.DType, h.Shape)
		}
		v, err := npy.ReadFloat64(f, nil, n)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", path, err)
		}
		return checkProfile(path, v)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	r := csv.NewReader(bytes.NewReader(b))
	r.FieldsPerRecord = -1
	rows, err := r.ReadAll()
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	col := 0
	start := 0
	if len(rows) > 0 {
		if _, err := strconv.ParseFloat(strings.TrimSpace(rows[0][0]), 64); err != nil {
			col = -1
			for k, h := range rows[0] {
				if strings.TrimSpace(h) == "profile_s" {
					col = k
				}
			}
			if col < 0 {
				return nil, fmt.Errorf("%s: the header has no profile_s column", path)
			}
			start = 1
		}
	}
	var v []float64
	for i, row := range rows[start:] {
		if col >= len(row) {
			return nil, fmt.Errorf("%s: line %d: missing profile_s value", path, i+start+1)
		}
		x, err := strconv.ParseFloat(strings.TrimSpace(row[col]), 64)
		if err != nil {
			return nil, fmt.Errorf("%s: line %d: %q is not a number", path, i+start+1, row[col])
		}
		v = append(v, x)
	}
	if len(v) != n {
		return nil, fmt.Errorf("%s: %d values for %d elements", path, len(v), n)
	}
	return checkProfile(path, v)
}

func checkProfile(path string, v []float64) ([]float64, error) {
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) || math.Abs(x) > 1e-4 {
			return nil, fmt.Errorf("%s: value %d (%g s) must be finite and within 100 us (values are seconds)", path, i, x)
		}
	}
	return v, nil
}

// formImage beamforms a on grid g with model m.
func formImage(a *acq.Acquisition, ch *recon.Channels, g *recon.Grid, m recon.DelayModel, cfg recon.Config) ([]complex64, error) {
	bf, err := recon.NewBeamformer(a, g, m, cfg)
	if err != nil {
		return nil, err
	}
	return bf.Form(nil, ch)
}

// bmodeImage turns a complex image into a report image (scan converted for
// sector grids), normalised to ref (the image maximum when ref <= 0).
func bmodeImage(g *recon.Grid, img []complex64, ref, dr float64, title string) report.Image {
	env := recon.Envelope(img)
	db := recon.LogCompress(env, ref, dr)
	if g.Kind == recon.Rect && g.Rows > 1 {
		return report.Image{XM: g.X, ZM: g.Z, DB: db, Title: title}
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	zlo, zhi := math.Inf(1), math.Inf(-1)
	for i := range g.PX {
		lo, hi = math.Min(lo, g.PX[i]), math.Max(hi, g.PX[i])
		zlo, zhi = math.Min(zlo, g.PZ[i]), math.Max(zhi, g.PZ[i])
	}
	n := 400
	dx := math.Max((hi-lo), (zhi-zlo)) / float64(n)
	var xs, zs []float64
	for x := lo; x <= hi; x += dx {
		xs = append(xs, x)
	}
	for z := zlo; z <= zhi; z += dx {
		zs = append(zs, z)
	}
	return report.Image{XM: xs, ZM: zs, DB: recon.ToRect(db, g, xs, zs), Title: title}
}

// maxEnvelope returns the largest pixel magnitude.
func maxEnvelope(img []complex64) float64 {
	m := 0.0
	for _, v := range img {
		m = math.Max(m, math.Hypot(float64(real(v)), float64(imag(v))))
	}
	return m
}

// writeImageFiles writes image.npy (complex64 [rows][cols]), x_m.npy, z_m.npy
// and bmode.png into dir, with the given name prefix.
func writeImageFiles(dir, prefix string, g *recon.Grid, img []complex64, bm report.Image, opt report.BModeOptions) error {
	shape := []int{g.Rows, g.Cols}
	if err := atomicfile.Write(filepath.Join(dir, prefix+"image.npy"), true, func(w io.Writer) error {
		return npy.WriteComplex64(w, shape, img)
	}); err != nil {
		return err
	}
	xs, zs, cshape := g.X, g.Z, []int(nil)
	if g.Kind != recon.Rect || g.Rows == 1 {
		xs, zs, cshape = g.PX, g.PZ, shape
	}
	xshape, zshape := []int{len(xs)}, []int{len(zs)}
	if cshape != nil {
		xshape, zshape = cshape, cshape
	}
	if err := atomicfile.Write(filepath.Join(dir, prefix+"x_m.npy"), true, func(w io.Writer) error {
		return npy.WriteFloat64(w, xshape, xs)
	}); err != nil {
		return err
	}
	if err := atomicfile.Write(filepath.Join(dir, prefix+"z_m.npy"), true, func(w io.Writer) error {
		return npy.WriteFloat64(w, zshape, zs)
	}); err != nil {
		return err
	}
	return atomicfile.Write(filepath.Join(dir, prefix+"bmode.png"), true, func(w io.Writer) error {
		return report.BModePNG(w, bm, opt)
	})
}
