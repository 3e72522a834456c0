package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"celerity/acq"
	"celerity/correction"
	"celerity/internal/npy"
	"celerity/metrics"
	"celerity/recon"
)

// CompareCmd measures two images or acquisitions with the same regions.
type CompareCmd struct {
	A        string  `arg:"" help:"First image folder (image.npy, x_m.npy, z_m.npy) or acquisition folder." type:"existingdir" placeholder:"A"`
	B        string  `arg:"" help:"Second image folder or acquisition folder." type:"existingdir" placeholder:"B"`
	Regions  string  `help:"Region pairs (YAML: pairs of inside/outside regions in mm)." type:"existingfile" placeholder:"FILE"`
	Targets  string  `help:"Point targets to measure, x:z in mm separated by semicolons, e.g. --targets='-6:14;0:22'." placeholder:"LIST"`
	SpeedMPS float64 `help:"Speed for forming images of acquisition folders (default: each one's assumed speed)." name:"speed-mps"`
	JSON     bool    `name:"json" help:"Print the result as one JSON object on stdout."`
}

// Help is the long help.
func (c *CompareCmd) Help() string {
	return `Measures contrast, CNR, gCNR and speckle SNR of each region pair, and the -6 dB widths and
positions of point targets, on two images side by side. An acquisition folder is first imaged
by delay-and-sum at --speed-mps or its assumed speed. Region files are YAML:

  pairs:
    - {name: cyst, inside: {circle_mm: [4, 16, 2.8]}, outside: {annulus_mm: [4, 16, 4.2, 7.7]}}
    - {name: left, inside: {rect_mm: [-10, -6, 20, 24]}, outside: {rect_mm: [-4, 0, 20, 24]}}`
}

// Validate checks flags.
func (c *CompareCmd) Validate() error {
	if c.Regions == "" && c.Targets == "" {
		return fmt.Errorf("give --regions, --targets or both")
	}
	return nil
}

func parseTargets(s string) ([][2]float64, error) {
	var out [][2]float64
	for _, p := range strings.Split(s, ";") {
		f := strings.Split(strings.TrimSpace(p), ":")
		if len(f) != 2 {
			return nil, fmt.Errorf("target %q: want x:z in mm", p)
		}
		x, err1 := strconv.ParseFloat(f[0], 64)
		z, err2 := strconv.ParseFloat(f[1], 64)
		if err1 != nil || err2 != nil || !(z > 0) {
			return nil, fmt.Errorf("target %q: want x:z in mm with z > 0", p)
		}
		out = append(out, [2]float64{x * 1e-3, z * 1e-3})
	}
	return out, nil
}

// loadImage reads an image folder, or forms an image of an acquisition folder.
func (c *CompareCmd) loadImage(dir string) (*recon.Grid, []complex64, error) {
	if _, err := os.Stat(filepath.Join(dir, "image.npy")); err == nil {
		return readImageFolder(dir)
	}
	a, err := acq.Load(dir)
	if err != nil {
		return nil, nil, err
	}
	v := c.SpeedMPS
	if v == 0 {
		v = a.AssumedSpeedMPS
	}
	g, err := defaultGrid(a, v)
	if err != nil {
		return nil, nil, err
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		return nil, nil, err
	}
	imf := imagingFlags{FNumber: 1.5, Window: "hann", Interp: "linear", DynamicDB: 60}
	cfg, _ := imf.config()
	img, err := formImage(a, ch, &g, recon.NewHomogeneous(v, a.Probe.Elements()), cfg)
	return &g, img, err
}

func readImageFolder(dir string) (*recon.Grid, []complex64, error) {
	read1 := func(name string) ([]float64, error) {
		path := filepath.Join(dir, name)
		f, h, err := npy.Open(path, 1<<28)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", path, err)
		}
		defer f.Close()
		if h.DType != npy.Float64 || len(h.Shape) != 1 {
			return nil, fmt.Errorf("%s: want a 1-D float64 axis (rectangular grids only), got %s %v", path, h.DType, h.Shape)
		}
		return npy.ReadFloat64(f, nil, h.Shape[0])
	}
	xs, err := read1("x_m.npy")
	if err != nil {
		return nil, nil, err
	}
	zs, err := read1("z_m.npy")
	if err != nil {
		return nil, nil, err
	}
	path := filepath.Join(dir, "image.npy")
	f, h, err := npy.Open(path, 1<<30)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %v", path, err)
	}
	defer f.Close()
	if h.DType != npy.Complex64 || len(h.Shape) != 2 || h.Shape[0] != len(zs) || h.Shape[1] != len(xs) {
		return nil, nil, fmt.Errorf("%s: want complex64 [%d][%d] matching z_m.npy and x_m.npy, got %s %v", path, len(zs), len(xs), h.DType, h.Shape)
	}
	img, err := npy.ReadComplex64(f, nil, len(zs)*len(xs))
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %v", path, err)
	}
	g, err := recon.RectFromAxes(xs, zs)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %v", dir, err)
	}
	return &g, img, nil
}

// Run runs the command.
func (c *CompareCmd) Run(g *Globals) error {
	var pairs []metrics.RegionPair
	var targets [][2]float64
	var err error
	if c.Regions != "" {
		if pairs, err = metrics.LoadRegions(c.Regions); err != nil {
			return err
		}
	}
	if c.Targets != "" {
		if targets, err = parseTargets(c.Targets); err != nil {
			return fmt.Errorf("--targets: %v", err)
		}
	}
	out := map[string]any{}
	sums := map[string]map[string]float64{}
	for _, side := range []struct{ name, dir string }{{"a", c.A}, {"b", c.B}} {
		grid, img, err := c.loadImage(side.dir)
		if err != nil {
			return err
		}
		m, err := correction.Measure(grid, img, targets, 1.5e-3, pairs)
		if err != nil {
			return fmt.Errorf("%s: %v", side.dir, err)
		}
		out[side.name] = map[string]any{"dir": side.dir, "summary": m.Summary(), "details": m}
		sums[side.name] = m.Summary()
	}
	if c.JSON {
		return printJSON(g.stdout, out)
	}
	fmt.Fprintf(g.stdout, "%-30s %12s %12s\n", "metric", "A", "B")
	for _, k := range sortedKeys(sums["a"]) {
		fmt.Fprintf(g.stdout, "%-30s %12.4g %12.4g\n", k, sums["a"][k], sums["b"][k])
	}
	fmt.Fprintf(g.stdout, "A = %s\nB = %s\n", c.A, c.B)
	return nil
}
