package main

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strings"
	"time"

	"celerity/aberration"
	"celerity/acq"
	"celerity/internal/atomicfile"
	"celerity/internal/npy"
	"celerity/metrics"
	"celerity/recon"
	"celerity/report"
	"celerity/speed"
)

// AberrationCmd estimates the per-element arrival-time error profile.
type AberrationCmd struct {
	Dir string `arg:"" help:"Acquisition folder." type:"existingdir" placeholder:"DIR"`
	modelFlags
	Patches     string  `help:"Isoplanatic patches in mm, x0:x1,z0:z1 separated by semicolons, e.g. --patches='-19:-6,15:35;-6:6,15:35' (default: three side by side across the array)." placeholder:"LIST"`
	Method      string  `help:"Estimator: beamsum (each element against the beamformed sum), pairs (least squares over many element pairs) or neighbour (integrated neighbour differences)." default:"beamsum" enum:"beamsum,pairs,neighbour"`
	Iterations  int     `help:"Largest number of correct / re-form / re-estimate rounds." default:"6"`
	PixelMM     float64 `name:"pixel-mm" help:"Pixel spacing of the patches in mm (default: half a wavelength, widened to bound the work per pass). Finer pixels lower the estimate's noise floor behind sparse plane-wave compounding, at a cost in time." placeholder:"MM"`
	SubAperture int     `name:"sub-aperture" help:"Adjacent elements summed before the pairs and neighbour correlations, odd (default: 1 for synthetic aperture and single waves; for compounded plane or diverging waves about a third of the coherence length of their main lobe, which cancels the grating-lobe clutter of sparse compounding)." placeholder:"N"`
	Out         string  `help:"Output folder to create: profile.csv, profile.npy, profile.png." placeholder:"OUT"`
	Force       bool    `help:"Replace an existing output folder."`
	JSON        bool    `name:"json" help:"Print the result as one JSON object on stdout."`
}

// Help is the long help.
func (c *AberrationCmd) Help() string {
	return `Estimates what is left of the focusing error element by element once the bulk speed is known:
a profile of arrival-time errors (seconds, positive = later), with its mean and linear trend
removed and reported apart (a time shift and a steering are not focusing errors). The bulk
model comes from --speed-mps or --layers; without either, the speed is estimated first by the
focus sweep. Each patch gives its own profile; their disagreement says whether the errors are
the same across the field (isoplanatic). On three or more plane or diverging waves the
profile's curvature, which the element-by-element estimate leaves poorly determined, is then
set by the coherence of the events' images.

The correction applies on receive and on transmit: exactly for synthetic-aperture data (the
firing element's own correction); for plane and diverging waves through the sum of the firing
elements' wavelets that arrive within the pulse envelope at each pixel (the first Fresnel zone),
at the centre frequency, which follows a screen that varies within that zone.

celerity is a research and quality-assurance tool, not a medical device, and is not for
diagnosis or treatment decisions.`
}

// Validate checks flags.
func (c *AberrationCmd) Validate() error {
	if c.Iterations < 1 || c.Iterations > 100 {
		return fmt.Errorf("--iterations must be between 1 and 100")
	}
	if !(c.PixelMM >= 0 && c.PixelMM <= 10) {
		return fmt.Errorf("--pixel-mm must be between 0 (automatic) and 10 mm, got %g", c.PixelMM)
	}
	if c.SubAperture < 0 || (c.SubAperture > 0 && c.SubAperture%2 == 0) {
		return fmt.Errorf("--sub-aperture must be an odd number of elements, or 0 (automatic), got %d", c.SubAperture)
	}
	return c.modelFlags.validate(false)
}

// parsePatches reads "x0:x1,z0:z1;..." in mm.
func parsePatches(s string) ([]aberration.Patch, error) {
	var out []aberration.Patch
	for _, part := range strings.Split(s, ";") {
		r, err := parseROI(strings.TrimSpace(part))
		if err != nil {
			return nil, err
		}
		out = append(out, aberration.Patch{X0: r.X0, X1: r.X1, Z0: r.Z0, Z1: r.Z1})
	}
	return out, nil
}

type aberrationOutput struct {
	*aberration.Result
	Model        string    `json:"model"`
	SpeedMPS     float64   `json:"speed_mps,omitempty"`
	TruthRMSS    *float64  `json:"truth_rms_s,omitempty"`
	TruthErrRMSS *float64  `json:"truth_error_rms_s,omitempty"`
	TruthCorr    *float64  `json:"truth_correlation,omitempty"`
	ElementXM    []float64 `json:"element_x_m"`
	Seconds      float64   `json:"seconds"`
	Caution      string    `json:"caution"`
}

// bulkModel returns the model from the flags, or a homogeneous one at the
// speed the sweep finds.
func bulkModel(g *Globals, a *acq.Acquisition, ch *recon.Channels, mf *modelFlags) (recon.DelayModel, float64, []string, error) {
	if mf.SpeedMPS != 0 || mf.Layers != "" {
		m, err := mf.build(a)
		return m, mf.SpeedMPS, nil, err
	}
	bar := g.newProgress(40, "speed")
	r, err := speed.Sweep(a, ch, speed.SweepConfig{Progress: bar.set})
	bar.finish()
	if err != nil {
		return nil, 0, nil, fmt.Errorf("estimating the bulk speed first: %w", err)
	}
	note := fmt.Sprintf("bulk speed estimated first by the focus sweep: %.1f m/s (%s confidence)", r.SpeedMPS, r.Confidence)
	base := recon.NewHomogeneous(r.SpeedMPS, a.Probe.Elements())
	if mf.Profile != "" {
		m, err := (&modelFlags{SpeedMPS: r.SpeedMPS, Profile: mf.Profile}).build(a)
		return m, r.SpeedMPS, []string{note}, err
	}
	return base, r.SpeedMPS, []string{note}, nil
}

// Run runs the command.
func (c *AberrationCmd) Run(g *Globals) error {
	a, err := acq.Load(c.Dir)
	if err != nil {
		return err
	}
	truth, err := acq.LoadTruth(c.Dir)
	if err != nil {
		return err
	}
	t0 := time.Now()
	ch, err := recon.Prepare(a)
	if err != nil {
		return err
	}
	model, v, notes, err := bulkModel(g, a, ch, &c.modelFlags)
	if err != nil {
		return err
	}
	method, err := aberration.ParseMethod(c.Method)
	if err != nil {
		return err
	}
	cfg := aberration.Config{Model: model, Method: method, Iterations: c.Iterations, PixelM: c.PixelMM * 1e-3, SubAperture: c.SubAperture}
	if c.Patches != "" {
		if cfg.Patches, err = parsePatches(c.Patches); err != nil {
			return fmt.Errorf("--patches: %v", err)
		}
	}
	bar := g.newProgress(c.Iterations, "aberration")
	cfg.Progress = bar.set
	res, err := aberration.Estimate(a, ch, cfg)
	bar.finish()
	if err != nil {
		return err
	}
	res.Notes = append(notes, res.Notes...)
	out := aberrationOutput{Result: res, Model: model.String(), SpeedMPS: v, Caution: Caution}
	for _, e := range a.Probe.Elements() {
		out.ElementXM = append(out.ElementXM, e.X)
	}
	var truthProf []float64
	if truth != nil && truth.Screen != nil && len(truth.Screen.DelaysS) == a.NumElements() {
		truthProf = truth.Screen.DelaysS
		e, r, tr := profileVsTruth(res.ProfileS, truthProf, out.ElementXM)
		out.TruthErrRMSS, out.TruthCorr, out.TruthRMSS = &e, &r, &tr
	}
	out.Seconds = time.Since(t0).Seconds()
	if c.Out != "" {
		d, err := atomicfile.NewDir(c.Out, c.Force)
		if err != nil {
			return err
		}
		defer d.Abort()
		if err := writeProfileFiles(d.Path(), &out, truthProf); err != nil {
			return err
		}
		if err := d.Commit(); err != nil {
			return err
		}
	}
	if c.JSON {
		return printJSON(g.stdout, out)
	}
	fmt.Fprintf(g.stdout, "profile         %.1f ns rms over %d elements (%s, %d iterations)\n", res.RMSS*1e9, len(res.ProfileS), res.Method, res.Iterations)
	fmt.Fprintf(g.stdout, "removed         mean %.1f ns, trend %.3g ns/mm\n", res.MeanS*1e9, res.TrendSPerM*1e9/1e3)
	if res.CurvatureFromEvents {
		fmt.Fprintf(g.stdout, "curvature       set by the coherence of the events' images\n")
	}
	fmt.Fprintf(g.stdout, "coherence       lag-one %.3f -> %.3f, coherence factor %.3f -> %.3f\n", res.Before.LagOneCoherence, res.After.LagOneCoherence, res.Before.CoherenceFactor, res.After.CoherenceFactor)
	fmt.Fprintf(g.stdout, "patches         %d, disagreement %.0f %% of the profile rms (isoplanatic: %v)\n", len(res.Patches), 100*res.Disagreement, res.Isoplanatic)
	if out.TruthErrRMSS != nil {
		fmt.Fprintf(g.stdout, "against truth   true %.1f ns rms, error %.1f ns rms (%.0f %%), correlation %.3f\n", *out.TruthRMSS*1e9, *out.TruthErrRMSS*1e9, 100**out.TruthErrRMSS / *out.TruthRMSS, *out.TruthCorr)
	}
	for _, n := range res.Notes {
		fmt.Fprintf(g.stdout, "note            %s\n", n)
	}
	if c.Out != "" {
		fmt.Fprintf(g.stdout, "wrote           %s\n", c.Out)
	}
	fmt.Fprintln(g.stdout, Caution)
	return nil
}

// profileVsTruth compares an estimated profile with the truth after removing
// mean and trend from both (metrics.ProfileError): rms error, correlation,
// and the truth's detrended rms.
func profileVsTruth(est, truth, x []float64) (errRMS, corr, truthRMS float64) {
	errRMS, corr = metrics.ProfileError(est, truth, x)
	t, _, _ := metrics.Detrend(truth, x)
	for _, v := range t {
		truthRMS += v * v
	}
	return errRMS, corr, math.Sqrt(truthRMS / float64(len(t)))
}

// writeProfileFiles writes profile.csv, profile.npy, profile.png and
// aberration.json into dir.
func writeProfileFiles(dir string, o *aberrationOutput, truth []float64) error {
	if err := atomicfile.Write(filepath.Join(dir, "profile.npy"), true, func(w io.Writer) error {
		return npy.WriteFloat64(w, []int{len(o.ProfileS)}, o.ProfileS)
	}); err != nil {
		return err
	}
	if err := atomicfile.Write(filepath.Join(dir, "profile.csv"), true, func(w io.Writer) error {
		if truth != nil {
			fmt.Fprintln(w, "element,x_m,profile_s,truth_s")
		} else {
			fmt.Fprintln(w, "element,x_m,profile_s")
		}
		for j, v := range o.ProfileS {
			if truth != nil {
				fmt.Fprintf(w, "%d,%g,%g,%g\n", j, o.ElementXM[j], v, truth[j])
			} else {
				fmt.Fprintf(w, "%d,%g,%g\n", j, o.ElementXM[j], v)
			}
		}
		return nil
	}); err != nil {
		return err
	}
	if err := atomicfile.Write(filepath.Join(dir, "aberration.json"), true, func(w io.Writer) error { return printJSON(w, o) }); err != nil {
		return err
	}
	return atomicfile.Write(filepath.Join(dir, "profile.png"), true, func(w io.Writer) error {
		return report.LinePNG(w, profilePlot(o.ProfileS, o.ElementXM, truth))
	})
}

// profilePlot draws the profile (ns) against element position (mm), with the
// truth (mean and trend removed) when known.
func profilePlot(p, x, truth []float64) report.LinePlot {
	xs := make([]float64, len(x))
	ys := make([]float64, len(p))
	for i := range x {
		xs[i] = x[i] * 1e3
		ys[i] = p[i] * 1e9
	}
	lp := report.LinePlot{Title: "arrival-time error profile (mean and trend removed)", XLabel: "element position (mm)", YLabel: "arrival-time error (ns)",
		Series: []report.Series{{Name: "estimate", X: xs, Y: ys, Points: true}}}
	if truth != nil {
		t, _, _ := metrics.Detrend(truth, x)
		ts := make([]float64, len(t))
		for i := range t {
			ts[i] = t[i] * 1e9
		}
		lp.Series = append(lp.Series, report.Series{Name: "truth", X: xs, Y: ts, Dashed: true})
	}
	return lp
}
