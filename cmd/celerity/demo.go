package main

import (
	_ "embed"
	"fmt"
	"io"
	"path/filepath"
	"time"

	"celerity/acq"
	"celerity/internal/atomicfile"
	"celerity/recon"
	"celerity/report"
	"celerity/sim"
)

//go:embed demo.yaml
var demoScenario []byte

// DemoCmd runs the main job end to end on built-in simulated data.
type DemoCmd struct {
	Out   string `help:"Output folder to create." default:"celerity-demo" placeholder:"DIR"`
	Force bool   `help:"Replace an existing output folder."`
	JSON  bool   `name:"json" help:"Print a summary as JSON on stdout."`
}

// Help is the long help.
func (c *DemoCmd) Help() string {
	return `Simulates a scenario of our own (a gel phantom whose speed of sound is 1505 m/s, not the 1540 m/s
a scanner assumes, behind a chest-wall-like phase screen of 21 ns rms, with three wires and an
anechoic cyst, imaged with 11 compounded plane waves), then images it at the scanner's 1540 m/s
and at the true speed, and writes the acquisition, the images and a side-by-side comparison.
The scenario file is written beside the results so that it can be edited and rerun with
'celerity simulate'.`
}

// Run runs the demo.
func (c *DemoCmd) Run(g *Globals) error {
	sc, err := sim.ParseScenario("demo.yaml", demoScenario)
	if err != nil {
		return err
	}
	out, err := atomicfile.NewDir(c.Out, c.Force)
	if err != nil {
		return err
	}
	defer out.Abort()
	say := func(format string, args ...any) { fmt.Fprintf(g.stderr, format+"\n", args...) }
	say("celerity demo: %s", sc.Description)
	say("  %s", Caution)
	t0 := time.Now()
	res, err := simulateScenario(g, sc)
	if err != nil {
		return err
	}
	acqDir := filepath.Join(out.Path(), "acquisition")
	if err := acq.Save(acqDir, res.acq, res.truth, false); err != nil {
		return err
	}
	if err := atomicfile.WriteBytes(filepath.Join(out.Path(), "scenario.yaml"), false, demoScenario); err != nil {
		return err
	}
	say("1. simulated %d plane waves x %d elements from %d scatterers in %.1f s -> acquisition/",
		res.acq.NumEvents(), res.acq.NumElements(), res.scatterers, res.elapsed.Seconds())

	a := res.acq
	ch, err := recon.Prepare(a)
	if err != nil {
		return err
	}
	trueC := res.truth.SpeedMPS
	flags := imagingFlags{FNumber: 1.5, Window: "hann", Interp: "linear", DynamicDB: 60}
	cfg, _ := flags.config()
	grid, err := defaultGrid(a, 1540)
	if err != nil {
		return err
	}
	var marks []report.Mark
	for i, q := range res.truth.TargetsM {
		marks = append(marks, report.Mark{XM: q[0], ZM: q[1], Label: fmt.Sprintf("W%d", i+1)})
	}
	type shot struct {
		name string
		c    float64
		img  []complex64
	}
	shots := []*shot{{name: "scanner-1540", c: 1540}, {name: fmt.Sprintf("true-%.0f", trueC), c: trueC}}
	var panels []report.Image
	for _, s := range shots {
		m := recon.NewHomogeneous(s.c, a.Probe.Elements())
		s.img, err = formImage(a, ch, &grid, m, cfg)
		if err != nil {
			return err
		}
	}
	ref := 0.0
	for _, s := range shots {
		ref = max(ref, maxEnvelope(s.img))
	}
	opt := report.BModeOptions{DynamicRangeDB: 60, Marks: marks}
	for _, s := range shots {
		bm := bmodeImage(&grid, s.img, ref, 60, fmt.Sprintf("assumed %.0f m/s", s.c))
		panels = append(panels, bm)
		dir := filepath.Join(out.Path(), "image-"+s.name)
		if err := os_MkdirAll(dir); err != nil {
			return err
		}
		if err := writeImageFiles(dir, "", &grid, s.img, bm, opt); err != nil {
			return err
		}
	}
	if err := atomicfile.Write(filepath.Join(out.Path(), "compare.png"), false, func(w io.Writer) error {
		return report.SideBySidePNG(w, panels, opt)
	}); err != nil {
		return err
	}
	say("2. imaged at the scanner's 1540 m/s and at the true %.0f m/s -> image-*/, compare.png", trueC)

	corDir := filepath.Join(out.Path(), "correct")
	if err := os_MkdirAll(corDir); err != nil {
		return err
	}
	res2, err := runCorrection(g, a, res.truth, nil, 4, corDir, acqDir)
	if err != nil {
		return err
	}
	say("3. estimated the speed of sound: %.1f m/s (95 %% interval %.1f to %.1f, %s confidence); true %.0f m/s",
		res2.SpeedMPS, res2.CI95[0], res2.CI95[1], res2.Confidence, trueC)
	if res2.Truth != nil {
		say("4. estimated the near-field profile: %.1f ns rms; against the true screen: error %.1f ns rms, correlation %.3f",
			res2.ProfileRMS*1e9, res2.Truth["profile_error_rms_s"]*1e9, res2.Truth["profile_correlation"])
	}
	say("5. re-formed the image with the corrected delays: lateral width %.3f -> %.3f mm (ideal %.3f); report -> correct/report.html",
		res2.Before["lateral_width_mm"], res2.After["lateral_width_mm"], res2.Ideal["lateral_width_mm"])
	if err := out.Commit(); err != nil {
		return err
	}
	say("done in %.1f s; results in %s (open %s)", time.Since(t0).Seconds(), c.Out, filepath.Join(c.Out, "correct", "report.html"))
	if c.JSON {
		return printJSON(g.stdout, map[string]any{"out": c.Out, "true_speed_mps": trueC, "speed_mps": res2.SpeedMPS,
			"ci95_mps": res2.CI95, "confidence": res2.Confidence, "profile_rms_s": res2.ProfileRMS, "truth": res2.Truth,
			"before": res2.Before, "after": res2.After, "ideal": res2.Ideal, "seconds": time.Since(t0).Seconds()})
	}
	return nil
}
