package main

import (
	"fmt"
	"time"

	"celerity/acq"
	"celerity/internal/atomicfile"
	"celerity/recon"
	"celerity/report"
)

// ImageCmd forms a delay-and-sum image.
type ImageCmd struct {
	Dir string `arg:"" help:"Acquisition folder." type:"existingdir" placeholder:"DIR"`
	Out string `help:"Output folder to create (image.npy, x_m.npy, z_m.npy, bmode.png)." required:"" placeholder:"OUT"`
	modelFlags
	imagingFlags
	Force bool `help:"Replace an existing output folder."`
	JSON  bool `name:"json" help:"Print a summary as JSON on stdout."`
}

// Help is the long help.
func (c *ImageCmd) Help() string {
	return `Forms a delay-and-sum image of every transmit event, compounded coherently. The wave each
event launched is derived from its firing delays for the assumed speed (plane waves:
sin(theta) = c * slope; diverging and focused waves: a fitted virtual source; single elements:
the element). Delay models: --speed-mps (homogeneous), --layers (flat layers with refraction),
and either of these plus --profile (per-element arrival-time corrections, seconds).

image.npy holds the complex image (the analytic signal at each pixel), [z][x] for rectangular
grids and [radius][angle] for sector grids; x_m.npy and z_m.npy hold the pixel coordinates.`
}

// Validate checks flag combinations.
func (c *ImageCmd) Validate() error { return c.modelFlags.validate(true) }

// Run runs the command.
func (c *ImageCmd) Run(g *Globals) error {
	cfg, err := c.imagingFlags.config()
	if err != nil {
		return err
	}
	a, err := acq.Load(c.Dir)
	if err != nil {
		return err
	}
	m, err := c.modelFlags.build(a)
	if err != nil {
		return err
	}
	grid, err := c.imagingFlags.grid(a, m.FaceSpeed())
	if err != nil {
		return err
	}
	out, err := atomicfile.NewDir(c.Out, c.Force)
	if err != nil {
		return err
	}
	defer out.Abort()
	t0 := time.Now()
	ch, err := recon.Prepare(a)
	if err != nil {
		return err
	}
	img, err := formImage(a, ch, &grid, m, cfg)
	if err != nil {
		return err
	}
	elapsed := time.Since(t0)
	title := fmt.Sprintf("%s", m)
	var marks []report.Mark
	if t, err := acq.LoadTruth(c.Dir); err == nil && t != nil {
		for i, q := range t.TargetsM {
			marks = append(marks, report.Mark{XM: q[0], ZM: q[1], Label: fmt.Sprintf("T%d", i+1)})
		}
	}
	bm := bmodeImage(&grid, img, 0, c.DynamicDB, title)
	if err := writeImageFiles(out.Path(), "", &grid, img, bm, report.BModeOptions{DynamicRangeDB: c.DynamicDB, Marks: marks}); err != nil {
		return err
	}
	if err := out.Commit(); err != nil {
		return err
	}
	summary := map[string]any{"out": c.Out, "model": m.String(), "rows": grid.Rows, "cols": grid.Cols,
		"events": a.NumEvents(), "seconds": elapsed.Seconds()}
	if c.JSON {
		return printJSON(g.stdout, summary)
	}
	fmt.Fprintf(g.stderr, "formed a %d x %d image from %d events with %s in %.2f s\nwrote %s\n", grid.Rows, grid.Cols, a.NumEvents(), m, elapsed.Seconds(), c.Out)
	return nil
}
