package main

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"celerity/acq"
	"celerity/correction"
	"celerity/internal/atomicfile"
	"celerity/internal/jsonx"
	"celerity/metrics"
	"celerity/recon"
	"celerity/report"
)

// CorrectCmd runs the whole correction and writes the report.
type CorrectCmd struct {
	Dir     string `arg:"" help:"Acquisition folder." type:"existingdir" placeholder:"DIR"`
	Out     string `help:"Output folder to create." required:"" placeholder:"OUT"`
	Regions string `help:"Region pairs for contrast metrics (YAML; see docs). Default: from truth.yaml inclusions when present." type:"existingfile" placeholder:"FILE"`
	Rounds  int    `help:"Largest number of speed / profile rounds." default:"4"`
	Force   bool   `help:"Replace an existing output folder."`
	JSON    bool   `name:"json" help:"Print the result as one JSON object on stdout."`
}

// Help is the long help.
func (c *CorrectCmd) Help() string {
	return `Estimates the bulk speed of sound (with its interval) and the per-element arrival-time error
profile, alternating the two until both settle (a phase screen biases a focus-based speed
estimate, and a wrong speed biases the profile), re-forms the image with the corrected delay
model, and measures the image before (the scanner's assumed speed, no profile) and after, and
against the ideal image when the acquisition holds ground truth. Writes images (.npy, PNG),
the profile, metrics.json, metrics.csv, plots and a self-contained report.html.`
}

// Validate checks flags.
func (c *CorrectCmd) Validate() error {
	if c.Rounds < 1 || c.Rounds > 20 {
		return fmt.Errorf("--rounds must be between 1 and 20")
	}
	return nil
}

type correctOutput struct {
	SpeedMPS   float64                            `json:"speed_mps"`
	CI95       jsonx.Floats                       `json:"ci95_mps"`
	Confidence string                             `json:"confidence"`
	ProfileS   []float64                          `json:"profile_s"`
	ProfileRMS float64                            `json:"profile_rms_s"`
	Rounds     []correction.Round                 `json:"rounds"`
	Layers     []acq.Layer                        `json:"layers,omitempty"`
	Converged  bool                               `json:"converged"`
	Before     map[string]float64                 `json:"before"`
	After      map[string]float64                 `json:"after"`
	Ideal      map[string]float64                 `json:"ideal,omitempty"`
	Truth      map[string]float64                 `json:"truth,omitempty"`
	Recovered  map[string]float64                 `json:"recovered,omitempty"`
	Details    map[string]correction.ImageMetrics `json:"details"`
	Notes      []string                           `json:"notes,omitempty"`
	Seconds    float64                            `json:"seconds"`
	Caution    string                             `json:"caution"`
}

// Run runs the command.
func (c *CorrectCmd) Run(g *Globals) error {
	a, err := acq.Load(c.Dir)
	if err != nil {
		return err
	}
	truth, err := acq.LoadTruth(c.Dir)
	if err != nil {
		return err
	}
	var pairs []metrics.RegionPair
	if c.Regions != "" {
		if pairs, err = metrics.LoadRegions(c.Regions); err != nil {
			return err
		}
	}
	out, err := atomicfile.NewDir(c.Out, c.Force)
	if err != nil {
		return err
	}
	defer out.Abort()
	res, err := runCorrection(g, a, truth, pairs, c.Rounds, out.Path(), c.Dir)
	if err != nil {
		return err
	}
	if err := out.Commit(); err != nil {
		return err
	}
	if c.JSON {
		return printJSON(g.stdout, res)
	}
	fmt.Fprint(g.stdout, correctText(res, c.Out))
	return nil
}

// runCorrection does the work of correct and writes its files into dir.
func runCorrection(g *Globals, a *acq.Acquisition, truth *acq.Truth, pairs []metrics.RegionPair, rounds int, dir, src string) (*correctOutput, error) {
	t0 := time.Now()
	ch, err := recon.Prepare(a)
	if err != nil {
		return nil, err
	}
	bar := g.newProgress(100, "correcting")
	cfg := correction.Config{Rounds: rounds, Progress: func(stage string, d, t int) {
		if bar.bar != nil {
			bar.bar.Describe(stage)
		}
		bar.set(d, t)
	}}
	oc, err := correction.Run(a, ch, cfg)
	bar.finish()
	if err != nil {
		return nil, err
	}
	res := &correctOutput{SpeedMPS: oc.Speed.SpeedMPS, CI95: jsonx.Floats(oc.Speed.CI95MPS[:]), Confidence: oc.Speed.Confidence,
		Rounds: oc.Rounds, Converged: oc.Converged, Details: map[string]correction.ImageMetrics{}, Caution: Caution}
	res.Notes = append(res.Notes, oc.Speed.Notes...)
	res.Layers = oc.Layers
	if oc.Layers != nil {
		res.Notes = append(res.Notes, fmt.Sprintf("the speed resolved by depth shows %d distinct layers; the corrected model uses them", len(oc.Layers)))
	}
	if oc.Aberration != nil {
		res.ProfileS = oc.ProfileS
		for _, v := range res.ProfileS {
			res.ProfileRMS += v * v
		}
		res.ProfileRMS = math.Sqrt(res.ProfileRMS / float64(len(res.ProfileS)))
		res.Notes = append(res.Notes, oc.Aberration.Notes...)
	}
	res.Notes = dedupe(res.Notes)
	if !oc.Converged {
		res.Notes = append(res.Notes, fmt.Sprintf("the speed / profile alternation had not settled after %d rounds", len(oc.Rounds)))
	}
	grid, err := defaultGrid(a, oc.Speed.SpeedMPS)
	if err != nil {
		return nil, err
	}
	ev, err := correction.Evaluate(a, ch, oc, truth, correction.EvalConfig{Grid: &grid, Pairs: pairs})
	if err != nil {
		return nil, err
	}
	for _, s := range ev.Shots {
		res.Details[s.Name] = s.Metrics
	}
	res.Before, res.After, res.Ideal, res.Recovered, res.Truth = ev.Before, ev.After, ev.Ideal, ev.Recovered, ev.Truth
	res.Seconds = time.Since(t0).Seconds()
	if err := writeCorrectFiles(dir, a, src, ev, oc, res); err != nil {
		return nil, err
	}
	return res, nil
}

func sortedKeys(m map[string]float64) []string {
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	return ks
}

func correctText(r *correctOutput, out string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "speed of sound  %.1f m/s (95 %% interval %.1f to %.1f), confidence %s\n", r.SpeedMPS, r.CI95[0], r.CI95[1], r.Confidence)
	if r.ProfileS != nil {
		fmt.Fprintf(&b, "profile         %.1f ns rms\n", r.ProfileRMS*1e9)
	}
	top := 0.0
	for i, l := range r.Layers {
		if i < len(r.Layers)-1 {
			fmt.Fprintf(&b, "layer           %.1f to %.1f mm at %.1f m/s\n", top*1e3, (top+l.ThicknessM)*1e3, l.SpeedMPS)
			top += l.ThicknessM
		} else {
			fmt.Fprintf(&b, "layer           below %.1f mm at %.1f m/s\n", top*1e3, l.SpeedMPS)
		}
	}
	for i, rd := range r.Rounds {
		fmt.Fprintf(&b, "round %d         %.1f m/s, profile %.1f ns rms (changed %.1f ns)\n", i+1, rd.SpeedMPS, rd.ProfileRMSS*1e9, rd.ProfileChangeS*1e9)
	}
	b.WriteString("metric                           before      after")
	if r.Ideal != nil {
		b.WriteString("      ideal")
	}
	b.WriteString("\n")
	for _, k := range sortedKeys(r.After) {
		fmt.Fprintf(&b, "%-30s %9.3f  %9.3f", k, r.Before[k], r.After[k])
		if r.Ideal != nil {
			fmt.Fprintf(&b, "  %9.3f", r.Ideal[k])
		}
		b.WriteString("\n")
	}
	for _, k := range sortedKeys(r.Recovered) {
		fmt.Fprintf(&b, "recovered %-20s %.0f %%\n", k, 100*r.Recovered[k])
	}
	for _, k := range sortedKeys(r.Truth) {
		fmt.Fprintf(&b, "truth %-24s %g\n", k, r.Truth[k])
	}
	for _, n := range r.Notes {
		fmt.Fprintf(&b, "note            %s\n", n)
	}
	fmt.Fprintf(&b, "wrote           %s (report.html)\n", out)
	b.WriteString(Caution + "\n")
	return b.String()
}

// lateralPlot draws the envelope (dB) along x through each target, for each image.
func lateralPlot(ev *correction.Evaluation) report.LinePlot {
	grid, shots, targets, refC := ev.Grid, ev.Shots, ev.Targets, ev.RefSpeedMPS
	lp := report.LinePlot{Title: "lateral profiles through the point targets", XLabel: "x relative to the target (mm)", YLabel: "envelope (dB re image peak)"}
	for ti, t := range targets {
		if ti >= 3 {
			break
		}
		for _, s := range shots {
			env := recon.Envelope(s.Image)
			peak := 0.0
			for _, v := range env {
				peak = math.Max(peak, v)
			}
			z := t[1] * s.SpeedMPS / refC
			// nearest row
			iz := 0
			for i, zz := range grid.Z {
				if math.Abs(zz-z) < math.Abs(grid.Z[iz]-z) {
					iz = i
				}
			}
			// the brightest row within 0.5 mm holds the target's peak
			best := iz
			for i := range grid.Z {
				if math.Abs(grid.Z[i]-z) > 0.5e-3 {
					continue
				}
				if rowMaxNear(env, grid, i, t[0]) > rowMaxNear(env, grid, best, t[0]) {
					best = i
				}
			}
			var xs, ys []float64
			for ix, x := range grid.X {
				if math.Abs(x-t[0]) > 3e-3 {
					continue
				}
				v := env[best*grid.Cols+ix]
				xs = append(xs, (x-t[0])*1e3)
				ys = append(ys, 20*math.Log10(math.Max(v, 1e-12)/peak))
			}
			lp.Series = append(lp.Series, report.Series{Name: fmt.Sprintf("target %d, %s", ti+1, s.Name), X: xs, Y: ys, Dashed: s.Name == "before"})
		}
	}
	return lp
}

func rowMaxNear(env []float64, g *recon.Grid, row int, x0 float64) float64 {
	m := 0.0
	for ix, x := range g.X {
		if math.Abs(x-x0) <= 1e-3 {
			m = math.Max(m, env[row*g.Cols+ix])
		}
	}
	return m
}

func writeCorrectFiles(dir string, a *acq.Acquisition, src string, ev *correction.Evaluation, oc *correction.Outcome, res *correctOutput) error {
	grid, targets := ev.Grid, ev.Targets
	ref := 0.0
	for _, s := range ev.Shots {
		ref = math.Max(ref, maxEnvelope(s.Image))
	}
	var panels []report.Image
	for _, s := range ev.Shots {
		var marks []report.Mark
		for i, t := range targets {
			marks = append(marks, report.Mark{XM: t[0], ZM: t[1] * s.SpeedMPS / ev.RefSpeedMPS, Label: fmt.Sprintf("T%d", i+1)})
		}
		bm := bmodeImage(grid, s.Image, ref, 60, s.Title)
		panels = append(panels, bm)
		sub := filepath.Join(dir, s.Name)
		if err := os_MkdirAll(sub); err != nil {
			return err
		}
		if err := writeImageFiles(sub, "", grid, s.Image, bm, report.BModeOptions{DynamicRangeDB: 60, Marks: marks}); err != nil {
			return err
		}
	}
	if err := atomicfile.Write(filepath.Join(dir, "compare.png"), true, func(w io.Writer) error {
		return report.SideBySidePNG(w, panels, report.BModeOptions{DynamicRangeDB: 60})
	}); err != nil {
		return err
	}
	so := &speedOutput{Result: oc.Speed, Caution: Caution}
	if err := writeSpeedFiles(dir, so); err != nil {
		return err
	}
	if oc.Aberration != nil {
		applied := *oc.Aberration
		applied.ProfileS = oc.ProfileS
		ao := &aberrationOutput{Result: &applied, Model: oc.Model.String(), SpeedMPS: oc.Speed.SpeedMPS, Caution: Caution}
		for _, e := range a.Probe.Elements() {
			ao.ElementXM = append(ao.ElementXM, e.X)
		}
		var truthProf []float64
		if t, err := acq.LoadTruth(src); err == nil && t != nil && t.Screen != nil {
			truthProf = t.Screen.DelaysS
		}
		if err := writeProfileFiles(dir, ao, truthProf); err != nil {
			return err
		}
	}
	if len(targets) > 0 {
		if err := atomicfile.Write(filepath.Join(dir, "lateral.png"), true, func(w io.Writer) error {
			return report.LinePNG(w, lateralPlot(ev))
		}); err != nil {
			return err
		}
	}
	if err := atomicfile.Write(filepath.Join(dir, "metrics.json"), true, func(w io.Writer) error { return printJSON(w, res) }); err != nil {
		return err
	}
	if err := atomicfile.Write(filepath.Join(dir, "metrics.csv"), true, func(w io.Writer) error {
		fmt.Fprintln(w, "metric,before,after,ideal")
		for _, k := range sortedKeys(res.After) {
			iv := ""
			if res.Ideal != nil {
				iv = fmt.Sprintf("%g", res.Ideal[k])
			}
			fmt.Fprintf(w, "%s,%g,%g,%s\n", k, res.Before[k], res.After[k], iv)
		}
		return nil
	}); err != nil {
		return err
	}
	return writeReportHTML(dir, a, src, ev, oc, res)
}

func dedupe(v []string) []string {
	seen := map[string]bool{}
	var out []string
	for _, s := range v {
		if !seen[s] {
			seen[s] = true
			out = append(out, s)
		}
	}
	return out
}
