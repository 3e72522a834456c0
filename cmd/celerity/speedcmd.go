package main

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"celerity/acq"
	"celerity/correction"
	"celerity/internal/atomicfile"
	"celerity/internal/jsonx"
	"celerity/recon"
	"celerity/report"
	"celerity/speed"
)

// SpeedCmd estimates the speed of sound of an acquisition.
type SpeedCmd struct {
	Dir               string  `arg:"" help:"Acquisition folder." type:"existingdir" placeholder:"DIR"`
	Method            string  `help:"auto: the point-target fit when the data hold bright isolated targets that fit well, else the sweep; sweep: maximise a focus criterion over assumed speeds; targets: fit the arrival-time curves of bright point targets." default:"auto" enum:"auto,sweep,targets"`
	Criterion         string  `help:"Focus criterion of the sweep: auto (transmit-coherence for three or more plane or diverging waves, else coherence-factor), coherence-factor, transmit-coherence, lag-one-coherence, short-lag-coherence, brightness or normalized-variance." default:"auto"`
	RangeMPS          string  `help:"Speeds to search, min:max in m/s." default:"1400:1650" name:"range-mps"`
	ROI               string  `help:"Region of interest in mm at the scanner's assumed speed, x0:x1,z0:z1, e.g. --roi=-10:10,15:30 (write = before a leading minus sign). Default: chosen automatically, excluding the near field and noise-dominated depths." name:"roi" placeholder:"SPEC"`
	ByDepth           bool    `help:"Also resolve the speed by depth: average speeds in depth windows, inverted to layer speeds (Dix)." name:"by-depth"`
	WindowMM          float64 `help:"Depth window for --by-depth, mm." default:"5" name:"window-mm"`
	NominalMPS        float64 `help:"Specified speed of the material, m/s, for a pass/fail verdict." name:"nominal-mps"`
	ToleranceMPS      float64 `help:"Tolerance around --nominal-mps, m/s." name:"tolerance-mps"`
	Profile           string  `help:"Per-element arrival-time corrections (s) applied during the sweep (.npy or CSV)." type:"existingfile" placeholder:"FILE"`
	NoAberrationCheck bool    `help:"Skip the check for a near-field aberrator (and the re-estimate with its profile when one is found)." name:"no-aberration-check"`
	Seed              uint64  `help:"Seed of the bootstrap." default:"1"`
	Out               string  `help:"Output folder to create: criterion curve (CSV) and plot (PNG)." placeholder:"OUT"`
	Force             bool    `help:"Replace an existing output folder."`
	JSON              bool    `name:"json" help:"Print the result as one JSON object on stdout."`
}

// Help is the long help.
func (c *SpeedCmd) Help() string {
	return `Estimates the bulk speed of sound with a 95 % interval and a confidence ("high" or "low", with
the reason). The sweep forms aperture-domain data over a region that follows the echoes for each
assumed speed, deriving each event's transmit wavefront from its firing delays, and maximises
the focus criterion (coarse grid, fine grid, quadratic peak). On compounded plane or diverging
waves the default criterion is the coherence of the events' images (transmit-coherence): the
receive-element coherence factor reads high there, the more so near the array and with a narrow
span of angles; elsewhere it is the coherence factor across the receive elements. The interval
comes from a block
bootstrap over tiles of the region, combined with a systematic component of 0.15 %. The targets
method fits the arrival-time curves of wires or other bright point targets.

Unless --no-aberration-check, a quick arrival-time profile is estimated at the speed found; when
it shows a near-field aberrator (more than 5 ns rms once its mean, trend and curvature are
removed), the speed is re-estimated by alternating it with the profile, as correct does, and a
note says so: a screen pulls a focus-based estimate in a way the bootstrap cannot see.

A single unfocused plane wave gives diffuse echoes that are nearly incoherent across the
receive aperture, so the sweep reports low confidence there unless the data hold bright targets;
compounded steered waves or synthetic aperture restore the information.

With --nominal-mps and --tolerance-mps the verdict is "pass" when the whole 95 % interval lies
within nominal +/- tolerance, "fail" when it lies wholly outside, and "inconclusive" otherwise.`
}

// Validate checks flag combinations.
func (c *SpeedCmd) Validate() error {
	if (c.NominalMPS != 0) != (c.ToleranceMPS != 0) {
		return fmt.Errorf("--nominal-mps and --tolerance-mps go together")
	}
	if c.ToleranceMPS < 0 {
		return fmt.Errorf("--tolerance-mps must be positive")
	}
	if !(c.WindowMM > 0 && c.WindowMM < 1000) {
		return fmt.Errorf("--window-mm must be positive")
	}
	if c.ByDepth && c.Method == "targets" {
		return fmt.Errorf("--by-depth needs the sweep (--method sweep or auto)")
	}
	return nil
}

type speedOutput struct {
	*speed.Result
	Layers    []speed.Layer          `json:"layers,omitempty"`
	Intervals []speed.Layer          `json:"intervals,omitempty"`
	Windows   []speed.Window         `json:"windows,omitempty"`
	DepthConf string                 `json:"depth_confidence,omitempty"`
	Verdict   string                 `json:"verdict,omitempty"`
	Nominal   float64                `json:"nominal_mps,omitempty"`
	Tolerance float64                `json:"tolerance_mps,omitempty"`
	Targets   []speed.TargetFit      `json:"targets,omitempty"`
	Check     *correction.SpeedCheck `json:"aberration_check,omitempty"`
	Seconds   float64                `json:"seconds"`
	Caution   string                 `json:"caution"`
}

// Verdict compares an interval with nominal +/- tolerance.
func Verdict(ci [2]float64, nominal, tol float64) string {
	lo, hi := nominal-tol, nominal+tol
	switch {
	case math.IsNaN(ci[0]) || math.IsNaN(ci[1]):
		return "inconclusive"
	case ci[0] >= lo && ci[1] <= hi:
		return "pass"
	case ci[1] < lo || ci[0] > hi:
		return "fail"
	}
	return "inconclusive"
}

func parseRange(s string) (float64, float64, error) {
	f := strings.Split(s, ":")
	if len(f) != 2 {
		return 0, 0, fmt.Errorf("want min:max, got %q", s)
	}
	a, err1 := strconv.ParseFloat(f[0], 64)
	b, err2 := strconv.ParseFloat(f[1], 64)
	if err1 != nil || err2 != nil || !(b > a) || a < 300 || b > 10000 {
		return 0, 0, fmt.Errorf("want min:max with 300 <= min < max <= 10000, got %q", s)
	}
	return a, b, nil
}

// parseROI reads x0:x1,z0:z1 in mm.
func parseROI(s string) (*speed.Region, error) {
	parts := strings.Split(s, ",")
	if len(parts) != 2 {
		return nil, fmt.Errorf("want x0:x1,z0:z1 in mm, got %q", s)
	}
	var v [4]float64
	for i, p := range parts {
		f := strings.Split(p, ":")
		if len(f) != 2 {
			return nil, fmt.Errorf("want x0:x1,z0:z1 in mm, got %q", s)
		}
		for k := range 2 {
			x, err := strconv.ParseFloat(strings.TrimSpace(f[k]), 64)
			if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
				return nil, fmt.Errorf("%q is not a number", f[k])
			}
			v[2*i+k] = x * 1e-3
		}
	}
	r := &speed.Region{X0: v[0], X1: v[1], Z0: v[2], Z1: v[3]}
	if !(r.X1 > r.X0 && r.Z1 > r.Z0 && r.Z0 > 0) {
		return nil, fmt.Errorf("want x1 > x0 and z1 > z0 > 0, got %q", s)
	}
	return r, nil
}

// sweepConfig builds the sweep configuration from the flags.
func (c *SpeedCmd) sweepConfig(a *acq.Acquisition, g *Globals) (speed.SweepConfig, error) {
	lo, hi, err := parseRange(c.RangeMPS)
	if err != nil {
		return speed.SweepConfig{}, fmt.Errorf("--range-mps: %v", err)
	}
	var cr speed.Criterion // auto: zero, chosen by the sweep for the events it uses
	if c.Criterion != "auto" {
		if cr, err = speed.ParseCriterion(c.Criterion); err != nil {
			return speed.SweepConfig{}, fmt.Errorf("--criterion: %v", err)
		}
	}
	cfg := speed.SweepConfig{MinMPS: lo, MaxMPS: hi, Criterion: cr, Seed: c.Seed}
	if c.ROI != "" {
		if cfg.Region, err = parseROI(c.ROI); err != nil {
			return cfg, fmt.Errorf("--roi: %v", err)
		}
	}
	if c.Profile != "" {
		mf := modelFlags{Profile: c.Profile}
		els := a.Probe.Elements()
		prof, err := readProfile(c.Profile, len(els))
		if err != nil {
			return cfg, err
		}
		_ = mf
		cfg.Model = func(v float64) (recon.DelayModel, error) {
			return recon.NewCorrected(recon.NewHomogeneous(v, els), prof)
		}
	}
	return cfg, nil
}

// Run runs the command.
func (c *SpeedCmd) Run(g *Globals) error {
	a, err := acq.Load(c.Dir)
	if err != nil {
		return err
	}
	t0 := time.Now()
	ch, err := recon.Prepare(a)
	if err != nil {
		return err
	}
	cfg, err := c.sweepConfig(a, g)
	if err != nil {
		return err
	}
	out := speedOutput{Caution: Caution}
	method := c.Method
	var autoNote string
	if method == "auto" {
		method = "sweep"
		if c.ByDepth {
			autoNote = "method auto: the sweep, as --by-depth needs it"
		} else if tr, err := speed.Targets(a, ch, speed.TargetConfig{MinMPS: cfg.MinMPS, MaxMPS: cfg.MaxMPS, Region: cfg.Region}); err == nil && tr.Confidence == speed.High {
			method = "targets"
			autoNote = fmt.Sprintf("method auto: %d bright point target(s) fit well, so their arrival-time fit is reported (far more precise than a focus sweep on wires)", len(tr.Targets))
		} else {
			autoNote = "method auto: no bright point target fits well, so the focus sweep is reported"
		}
	}
	switch method {
	case "targets":
		tcfg := speed.TargetConfig{MinMPS: cfg.MinMPS, MaxMPS: cfg.MaxMPS, Region: cfg.Region}
		tr, err := speed.Targets(a, ch, tcfg)
		if err != nil {
			return err
		}
		out.Result = &tr.Result
		out.Targets = tr.Targets
		out.CI95 = jsonx.Floats(out.CI95MPS[:])
	default:
		bar := g.newProgress(40, "sweeping")
		cfg.Progress = bar.set
		var res *speed.Result
		if c.NoAberrationCheck || c.Profile != "" {
			res, err = speed.Sweep(a, ch, cfg)
		} else {
			res, out.Check, err = correction.EstimateSpeed(a, ch, cfg)
		}
		bar.finish()
		if err != nil {
			return err
		}
		out.Result = res
		if out.Check != nil && out.Check.Alternated && c.ByDepth {
			prof := out.Check.Profile
			els := a.Probe.Elements()
			cfg.Model = func(v float64) (recon.DelayModel, error) {
				return recon.NewCorrected(recon.NewHomogeneous(v, els), prof)
			}
		}
		if c.ByDepth {
			bar := g.newProgress(40, "by depth")
			cfg.Progress = bar.set
			dr, err := speed.ByDepth(a, ch, speed.DepthConfig{SweepConfig: cfg, WindowM: c.WindowMM * 1e-3})
			bar.finish()
			if err != nil {
				return err
			}
			out.Layers, out.Intervals, out.Windows, out.DepthConf = dr.Layers, dr.Intervals, dr.Windows, dr.Confidence
			for _, n := range dr.Notes {
				out.Notes = append(out.Notes, "by depth: "+n)
			}
		}
	}
	if autoNote != "" {
		out.Notes = append([]string{autoNote}, out.Notes...)
	}
	if c.NominalMPS != 0 {
		out.Verdict = Verdict(out.CI95MPS, c.NominalMPS, c.ToleranceMPS)
		out.Nominal, out.Tolerance = c.NominalMPS, c.ToleranceMPS
	}
	out.Seconds = time.Since(t0).Seconds()
	if c.Out != "" {
		if err := writeSpeedOutputs(c.Out, c.Force, &out); err != nil {
			return err
		}
	}
	if c.JSON {
		return printJSON(g.stdout, out)
	}
	fmt.Fprint(g.stdout, speedText(&out, c.Out))
	return nil
}

func speedText(o *speedOutput, outDir string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "speed of sound  %.1f m/s  (95 %% interval %.1f to %.1f m/s)  confidence %s\n", o.SpeedMPS, o.CI95MPS[0], o.CI95MPS[1], o.Confidence)
	fmt.Fprintf(&b, "method          %s (%s)\n", o.Method, o.Criterion)
	if o.Method == "sweep" {
		fmt.Fprintf(&b, "region          x %.1f..%.1f mm, z %.1f..%.1f mm at %.0f m/s, %d tiles\n", o.RegionMM[0], o.RegionMM[1], o.RegionMM[2], o.RegionMM[3], o.RefSpeed, o.Tiles)
	}
	for _, t := range o.Targets {
		fmt.Fprintf(&b, "target          (%.2f, %.2f) mm: %.1f +/- %.1f m/s from %d channels\n", t.XM*1e3, t.ZM*1e3, t.SpeedMPS, t.StdErrMPS, t.Channels)
	}
	if len(o.Layers) > 0 {
		b.WriteString("layers\n")
		for _, l := range o.Layers {
			fmt.Fprintf(&b, "  %5.1f to %5.1f mm  %.1f m/s  (%.1f to %.1f)\n", l.TopM*1e3, l.BottomM*1e3, l.SpeedMPS, l.CI95MPS[0], l.CI95MPS[1])
		}
	}
	if o.Verdict != "" {
		fmt.Fprintf(&b, "verdict         %s against %.1f +/- %.1f m/s\n", o.Verdict, o.Nominal, o.Tolerance)
	}
	for _, n := range o.Notes {
		fmt.Fprintf(&b, "note            %s\n", n)
	}
	if outDir != "" {
		fmt.Fprintf(&b, "wrote           %s\n", outDir)
	}
	b.WriteString(Caution + "\n")
	return b.String()
}

func writeSpeedOutputs(dir string, force bool, o *speedOutput) error {
	d, err := atomicfile.NewDir(dir, force)
	if err != nil {
		return err
	}
	defer d.Abort()
	if err := writeSpeedFiles(d.Path(), o); err != nil {
		return err
	}
	return d.Commit()
}

// writeSpeedFiles writes criterion.csv and criterion.png (sweeps) and
// speed.json into dir.
func writeSpeedFiles(dir string, o *speedOutput) error {
	if err := atomicfile.Write(filepath.Join(dir, "speed.json"), true, func(w io.Writer) error { return printJSON(w, o) }); err != nil {
		return err
	}
	if len(o.Curve) == 0 {
		return nil
	}
	if err := atomicfile.Write(filepath.Join(dir, "criterion.csv"), true, func(w io.Writer) error {
		fmt.Fprintf(w, "speed_mps,%s\n", strings.ReplaceAll(o.Criterion, "-", "_"))
		for _, p := range o.Curve {
			fmt.Fprintf(w, "%g,%g\n", p.SpeedMPS, p.Value)
		}
		return nil
	}); err != nil {
		return err
	}
	return atomicfile.Write(filepath.Join(dir, "criterion.png"), true, func(w io.Writer) error {
		return report.LinePNG(w, criterionPlot(o.Result))
	})
}

// criterionPlot draws the criterion against speed with the estimate and its interval.
func criterionPlot(r *speed.Result) report.LinePlot {
	var xs, ys []float64
	for _, p := range r.Curve {
		xs = append(xs, p.SpeedMPS)
		ys = append(ys, p.Value)
	}
	return report.LinePlot{
		Title:  fmt.Sprintf("%s against assumed speed", r.Criterion),
		XLabel: "assumed speed of sound (m/s)", YLabel: r.Criterion,
		Series: []report.Series{{Name: r.Criterion, X: xs, Y: ys, Points: true}},
		Bands:  []report.Band{{Lo: r.CI95MPS[0], Hi: r.CI95MPS[1], Label: "95 % interval"}},
		VLines: []report.VLine{{X: r.SpeedMPS, Label: fmt.Sprintf("estimate %.1f m/s (%s confidence)", r.SpeedMPS, r.Confidence)}},
	}
}

// WaterCmd prints the speed of sound of pure water.
type WaterCmd struct {
	TempC float64 `help:"Water temperature, degrees Celsius (0-95)." required:"" name:"temp-c"`
	JSON  bool    `name:"json" help:"Print the result as JSON on stdout."`
}

// Help is the long help.
func (c *WaterCmd) Help() string {
	return "Speed of sound in pure, air-free water at atmospheric pressure, from Marczak's fifth-order\npolynomial (JASA 102(5), 1997), valid from 0 to 95 C."
}

// Run runs the command.
func (c *WaterCmd) Run(g *Globals) error {
	v, err := waterSpeed(c.TempC)
	if err != nil {
		return err
	}
	if c.JSON {
		return printJSON(g.stdout, map[string]any{"temp_c": c.TempC, "speed_mps": v, "source": "Marczak, JASA 102(5), 1997"})
	}
	fmt.Fprintf(g.stdout, "pure water at %g C: %.2f m/s (Marczak 1997)\n", c.TempC, v)
	return nil
}
