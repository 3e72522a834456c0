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

type shot struct {
	name  string
	title string
	model recon.DelayModel
	c     float64 // face speed, for scaling truth coordinates
	img   []complex64
	m     correction.ImageMetrics
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
	els := a.Probe.Elements()
	cEst := oc.Speed.SpeedMPS
	shots := []*shot{
		{name: "before", title: fmt.Sprintf("before: %.0f m/s, no profile", a.AssumedSpeedMPS), model: recon.NewHomogeneous(a.AssumedSpeedMPS, els), c: a.AssumedSpeedMPS},
		{name: "after", title: fmt.Sprintf("after: %.1f m/s + profile", cEst), model: oc.Model, c: cEst},
	}
	trueC := 0.0
	if truth != nil {
		trueC = truth.SpeedMPS
		var ideal recon.DelayModel
		if len(truth.Layers) > 0 {
			l, err := recon.NewLayered(truth.Layers, els)
			if err != nil {
				return nil, err
			}
			ideal = l
			trueC = truth.MeanSpeed(0.03)
		} else {
			ideal = recon.NewHomogeneous(truth.SpeedMPS, els)
		}
		if truth.Screen != nil && len(truth.Screen.DelaysS) == len(els) {
			if ideal, err = recon.NewCorrected(ideal, truth.Screen.DelaysS); err != nil {
				return nil, err
			}
		}
		shots = append(shots, &shot{name: "ideal", title: "ideal: true medium and screen", model: ideal, c: trueC})
	}
	grid, err := defaultGrid(a, cEst)
	if err != nil {
		return nil, err
	}
	imf := imagingFlags{FNumber: 1.5, Window: "hann", Interp: "linear", DynamicDB: 60}
	rcfg, _ := imf.config()
	// Truth positions are given in the true medium; an image formed at
	// speed c shows an echo at depth z c / c_true (and the estimate's image
	// at z c_est / c_true), so targets and regions are looked for there.
	refC := trueC
	if refC == 0 {
		refC = cEst
	}
	var targets [][2]float64
	if truth != nil {
		targets = truth.TargetsM
		if pairs == nil && len(truth.Inclusions) > 0 {
			var cs [][2]float64
			var rs []float64
			for _, in := range truth.Inclusions {
				cs = append(cs, in.CenterM)
				rs = append(rs, in.RadiusM)
			}
			pairs = metrics.PairsFromInclusions(cs, rs)
		}
	}
	ref := 0.0
	for _, s := range shots {
		if s.img, err = formImage(a, ch, &grid, s.model, rcfg); err != nil {
			return nil, err
		}
		ref = math.Max(ref, maxEnvelope(s.img))
		scale := s.c / refC
		var tg [][2]float64
		for _, t := range targets {
			tg = append(tg, [2]float64{t[0], t[1] * scale})
		}
		var ps []metrics.RegionPair
		for _, p := range pairs {
			ps = append(ps, scalePair(p, scale))
		}
		if s.m, err = correction.Measure(&grid, s.img, tg, 1.5e-3, ps); err != nil {
			return nil, err
		}
		res.Details[s.name] = s.m
	}
	res.Before = shots[0].m.Summary()
	res.After = shots[1].m.Summary()
	if len(shots) > 2 {
		res.Ideal = shots[2].m.Summary()
		res.Recovered = map[string]float64{}
		if b, ok := res.Before["lateral_width_mm"]; ok {
			if i := res.Ideal["lateral_width_mm"]; b-i > 0 {
				res.Recovered["lateral_width"] = (b - res.After["lateral_width_mm"]) / (b - i)
			}
		}
		for k, i := range res.Ideal {
			if strings.HasSuffix(k, "_gcnr") {
				b := res.Before[k]
				if i-b > 0 {
					res.Recovered[strings.TrimSuffix(k, "_gcnr")+"_gcnr"] = (res.After[k] - b) / (i - b)
				}
			}
		}
	}
	if truth != nil {
		res.Truth = map[string]float64{"speed_mps": trueC, "speed_error_mps": cEst - trueC}
		if truth.Screen != nil && res.ProfileS != nil {
			x := make([]float64, len(els))
			for i, e := range els {
				x[i] = e.X
			}
			e, r, tr := profileVsTruth(res.ProfileS, truth.Screen.DelaysS, x)
			res.Truth["profile_rms_s"] = tr
			res.Truth["profile_error_rms_s"] = e
			res.Truth["profile_correlation"] = r
		}
	}
	res.Seconds = time.Since(t0).Seconds()
	if err := writeCorrectFiles(dir, a, src, &grid, shots, oc, res, targets, refC); err != nil {
		return nil, err
	}
	return res, nil
}

// scalePair moves a region pair's depths by scale (circles and annuli by
// their centres, rectangles by their edges).
func scalePair(p metrics.RegionPair, scale float64) metrics.RegionPair {
	return metrics.RegionPair{Name: p.Name, Inside: scaleRegion(p.Inside, scale), Outside: scaleRegion(p.Outside, scale)}
}

func scaleRegion(r metrics.Region, s float64) metrics.Region {
	switch v := r.(type) {
	case metrics.Circle:
		v.CZ *= s
		return v
	case metrics.Annulus:
		v.CZ *= s
		return v
	case metrics.Rect:
		v.Z0 *= s
		v.Z1 *= s
		return v
	case metrics.Difference:
		out := metrics.Difference{Base: scaleRegion(v.Base, s)}
		for _, h := range v.Holes {
			out.Holes = append(out.Holes, scaleRegion(h, s))
		}
		return out
	}
	return r
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
func lateralPlot(grid *recon.Grid, shots []*shot, targets [][2]float64, refC float64) report.LinePlot {
	lp := report.LinePlot{Title: "lateral profiles through the point targets", XLabel: "x relative to the target (mm)", YLabel: "envelope (dB re image peak)"}
	for ti, t := range targets {
		if ti >= 3 {
			break
		}
		for _, s := range shots {
			env := recon.Envelope(s.img)
			peak := 0.0
			for _, v := range env {
				peak = math.Max(peak, v)
			}
			z := t[1] * s.c / refC
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
			lp.Series = append(lp.Series, report.Series{Name: fmt.Sprintf("target %d, %s", ti+1, s.name), X: xs, Y: ys, Dashed: s.name == "before"})
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

func writeCorrectFiles(dir string, a *acq.Acquisition, src string, grid *recon.Grid, shots []*shot, oc *correction.Outcome, res *correctOutput, targets [][2]float64, refC float64) error {
	ref := 0.0
	for _, s := range shots {
		ref = math.Max(ref, maxEnvelope(s.img))
	}
	var panels []report.Image
	for _, s := range shots {
		var marks []report.Mark
		for i, t := range targets {
			marks = append(marks, report.Mark{XM: t[0], ZM: t[1] * s.c / refC, Label: fmt.Sprintf("T%d", i+1)})
		}
		bm := bmodeImage(grid, s.img, ref, 60, s.title)
		panels = append(panels, bm)
		sub := filepath.Join(dir, s.name)
		if err := os_MkdirAll(sub); err != nil {
			return err
		}
		if err := writeImageFiles(sub, "", grid, s.img, bm, report.BModeOptions{DynamicRangeDB: 60, Marks: marks}); err != nil {
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
		ao := &aberrationOutput{Result: oc.Aberration, Model: oc.Model.String(), SpeedMPS: oc.Speed.SpeedMPS, Caution: Caution}
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
			return report.LinePNG(w, lateralPlot(grid, shots, targets, refC))
		}); err != nil {
			return err
		}
	}
	if err := atomicfile.Write(filepath.Join(dir, "metrics.json"), true, func(w io.Writer) error { return printJSON(w, res) }); err != nil {
		return err
	}
	return atomicfile.Write(filepath.Join(dir, "metrics.csv"), true, func(w io.Writer) error {
		fmt.Fprintln(w, "metric,before,after,ideal")
		for _, k := range sortedKeys(res.After) {
			iv := ""
			if res.Ideal != nil {
				iv = fmt.Sprintf("%g", res.Ideal[k])
			}
			fmt.Fprintf(w, "%s,%g,%g,%s\n", k, res.Before[k], res.After[k], iv)
		}
		return nil
	})
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
