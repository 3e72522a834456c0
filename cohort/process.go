package cohort

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strings"

	"celerity/aberration"
	"celerity/acq"
	"celerity/correction"
	"celerity/internal/atomicfile"
	"celerity/internal/jsonx"
	"celerity/metrics"
	"celerity/recon"
	"celerity/report"
	"celerity/speed"
)

// Layer is one layer of the speed resolved by depth, in mm at the
// reference speed of the sweep.
type Layer struct {
	TopMM     jsonx.Float `json:"top_mm"`
	BottomMM  jsonx.Float `json:"bottom_mm"`
	SpeedMPS  jsonx.Float `json:"speed_mps"`
	CI95LoMPS jsonx.Float `json:"ci95_lo_mps"`
	CI95HiMPS jsonx.Float `json:"ci95_hi_mps"`
}

// Result is what the steps found for one acquisition: the stored result of
// its job. Numbers a step did not produce are NaN (null in JSON).
type Result struct {
	ID string `json:"id"`

	// Speed step. Method is "sweep" or "targets" (the method used, also
	// under MethodAuto); AberrationCompensated says that the sweep found a
	// near-field aberrator and re-estimated the speed with its profile.
	Method                string      `json:"method,omitempty"`
	SpeedMPS              jsonx.Float `json:"speed_mps"`
	CI95LoMPS             jsonx.Float `json:"ci95_lo_mps"`
	CI95HiMPS             jsonx.Float `json:"ci95_hi_mps"`
	Confidence            string      `json:"confidence,omitempty"`
	AberrationCompensated bool        `json:"aberration_compensated,omitempty"`
	Layers                []Layer     `json:"layers,omitempty"`
	DepthConfidence       string      `json:"depth_confidence,omitempty"`

	// Aberration step: the profile's rms (mean and linear trend removed), the
	// speed it was estimated at, and the coherence factor of its patches
	// before and after applying it.
	ProfileSpeedMPS jsonx.Float `json:"profile_speed_mps"`
	ProfileRMSS     jsonx.Float `json:"profile_rms_s"`
	CoherenceBefore jsonx.Float `json:"coherence_before"`
	CoherenceAfter  jsonx.Float `json:"coherence_after"`

	// Correct step: the speed and profile of the alternation, and the
	// image before (the scanner's assumed speed) and after correction: mean
	// -6 dB lateral width of the point targets, mean gCNR and contrast of
	// the region pairs (from the truth's inclusions or Settings.Regions).
	CorrectedSpeedMPS    jsonx.Float `json:"corrected_speed_mps"`
	CorrectedProfileRMSS jsonx.Float `json:"corrected_profile_rms_s"`
	LateralBeforeMM      jsonx.Float `json:"lateral_width_before_mm"`
	LateralAfterMM       jsonx.Float `json:"lateral_width_after_mm"`
	GCNRBefore           jsonx.Float `json:"gcnr_before"`
	GCNRAfter            jsonx.Float `json:"gcnr_after"`
	ContrastBeforeDB     jsonx.Float `json:"contrast_before_db"`
	ContrastAfterDB      jsonx.Float `json:"contrast_after_db"`

	// TrueSpeedMPS is the truth's speed when the folder holds truth.yaml
	// (simulated data): the medium's, or for layers the vertical
	// time-average speed down to the centre of the sweep's region.
	TrueSpeedMPS jsonx.Float `json:"true_speed_mps"`

	Notes []string `json:"notes,omitempty"`
	// Outputs is the folder of the per-acquisition outputs, relative to the
	// run's output folder ("" without Settings.KeepImages).
	Outputs string `json:"outputs,omitempty"`
}

func newResult(id string) *Result {
	n := jsonx.Float(math.NaN())
	return &Result{ID: id, SpeedMPS: n, CI95LoMPS: n, CI95HiMPS: n,
		ProfileSpeedMPS: n, ProfileRMSS: n, CoherenceBefore: n, CoherenceAfter: n,
		CorrectedSpeedMPS: n, CorrectedProfileRMSS: n, LateralBeforeMM: n, LateralAfterMM: n,
		GCNRBefore: n, GCNRAfter: n, ContrastBeforeDB: n, ContrastAfterDB: n, TrueSpeedMPS: n}
}

// stepError prefixes an estimator's error with its step.
func stepError(st Step, err error) error { return fmt.Errorf("%s: %w", st, err) }

// Process runs the steps of s (normalised) on the acquisition in dir and
// returns its result under the name id. When outDir is not empty the
// per-acquisition outputs are written there (the folder is replaced
// atomically), and Result.Outputs is set to outRel. It stops between steps
// when ctx is cancelled and returns ctx's error.
func Process(ctx context.Context, id, dir string, s *Settings, pairs []metrics.RegionPair, outDir, outRel string) (*Result, error) {
	a, err := acq.Load(dir)
	if err != nil {
		return nil, err
	}
	truth, err := acq.LoadTruth(dir)
	if err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		return nil, err
	}
	res := newResult(id)
	els := a.Probe.Elements()
	files := map[string]func(io.Writer) error{}
	sweep := speed.SweepConfig{MinMPS: s.MinMPS, MaxMPS: s.MaxMPS, Seed: s.Seed}
	refDepth := math.NaN()

	if s.Has(StepSpeed) {
		sr, check, tr, err := estimateSpeed(a, ch, s, sweep)
		if err != nil {
			return nil, stepError(StepSpeed, err)
		}
		res.Method = sr.Method
		res.SpeedMPS = jsonx.Float(sr.SpeedMPS)
		res.CI95LoMPS, res.CI95HiMPS = jsonx.Float(sr.CI95MPS[0]), jsonx.Float(sr.CI95MPS[1])
		res.Confidence = sr.Confidence
		res.Notes = append(res.Notes, sr.Notes...)
		if sr.Region.Z1 > sr.Region.Z0 {
			refDepth = (sr.Region.Z0 + sr.Region.Z1) / 2
		}
		if check != nil && check.Alternated {
			res.AberrationCompensated = true
		}
		out := map[string]any{"speed": sr}
		if tr != nil {
			out["targets"] = tr.Targets
		}
		if s.ByDepth {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			dc := speed.DepthConfig{SweepConfig: sweep, WindowM: s.WindowMM * 1e-3}
			if check != nil && check.Alternated && check.Profile != nil {
				prof := check.Profile
				dc.Model = func(v float64) (recon.DelayModel, error) {
					return recon.NewCorrected(recon.NewHomogeneous(v, els), prof)
				}
			}
			dr, err := speed.ByDepth(a, ch, dc)
			if err != nil {
				return nil, stepError(StepSpeed, fmt.Errorf("by depth: %w", err))
			}
			res.DepthConfidence = dr.Confidence
			for _, l := range dr.Layers {
				res.Layers = append(res.Layers, Layer{TopMM: jsonx.Float(l.TopM * 1e3), BottomMM: jsonx.Float(l.BottomM * 1e3),
					SpeedMPS: jsonx.Float(l.SpeedMPS), CI95LoMPS: jsonx.Float(l.CI95MPS[0]), CI95HiMPS: jsonx.Float(l.CI95MPS[1])})
			}
			for _, n := range dr.Notes {
				res.Notes = append(res.Notes, "by depth: "+n)
			}
			out["by_depth"] = dr
		}
		files["speed.json"] = func(w io.Writer) error { return writeJSON(w, out) }
		if len(sr.Curve) > 0 {
			files["criterion.csv"] = func(w io.Writer) error {
				fmt.Fprintf(w, "speed_mps,%s\n", strings.ReplaceAll(sr.Criterion, "-", "_"))
				for _, p := range sr.Curve {
					fmt.Fprintf(w, "%g,%g\n", p.SpeedMPS, p.Value)
				}
				return nil
			}
		}
	}

	if s.Has(StepAberration) {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		at := float64(res.SpeedMPS)
		if !s.Has(StepSpeed) || !finite(at) {
			at = a.AssumedSpeedMPS
			res.Notes = append(res.Notes, fmt.Sprintf("aberration: the profile was estimated at the scanner's assumed speed, %g m/s", at))
		}
		ar, err := aberration.Estimate(a, ch, aberration.Config{Model: recon.NewHomogeneous(at, els)})
		if err != nil {
			return nil, stepError(StepAberration, err)
		}
		res.ProfileSpeedMPS = jsonx.Float(at)
		res.ProfileRMSS = jsonx.Float(ar.RMSS)
		res.CoherenceBefore, res.CoherenceAfter = jsonx.Float(ar.Before.CoherenceFactor), jsonx.Float(ar.After.CoherenceFactor)
		for _, n := range ar.Notes {
			res.Notes = append(res.Notes, "aberration: "+n)
		}
		files["profile.csv"] = profileCSV(els, ar.ProfileS)
	}

	if s.Has(StepCorrect) {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		oc, err := correction.Run(a, ch, correction.Config{Sweep: sweep})
		if err != nil {
			return nil, stepError(StepCorrect, err)
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		ev, err := correction.Evaluate(a, ch, oc, truth, correction.EvalConfig{Pairs: pairs})
		if err != nil {
			return nil, stepError(StepCorrect, err)
		}
		res.CorrectedSpeedMPS = jsonx.Float(oc.Speed.SpeedMPS)
		if oc.ProfileS != nil {
			res.CorrectedProfileRMSS = jsonx.Float(metrics.RMS(oc.ProfileS))
		}
		if math.IsNaN(refDepth) && oc.Speed.Region.Z1 > oc.Speed.Region.Z0 {
			refDepth = (oc.Speed.Region.Z0 + oc.Speed.Region.Z1) / 2
		}
		res.LateralBeforeMM, res.LateralAfterMM = metricOf(ev.Before, "lateral_width_mm"), metricOf(ev.After, "lateral_width_mm")
		res.GCNRBefore, res.GCNRAfter = meanSuffix(ev.Before, "_gcnr"), meanSuffix(ev.After, "_gcnr")
		res.ContrastBeforeDB, res.ContrastAfterDB = meanSuffix(ev.Before, "_contrast_db"), meanSuffix(ev.After, "_contrast_db")
		if !oc.Converged {
			res.Notes = append(res.Notes, fmt.Sprintf("correct: the speed / profile alternation had not settled after %d rounds", len(oc.Rounds)))
		}
		files["correct.json"] = func(w io.Writer) error {
			return writeJSON(w, map[string]any{"speed": oc.Speed, "rounds": oc.Rounds, "converged": oc.Converged,
				"profile_s": jsonx.Floats(oc.ProfileS), "before": ev.Before, "after": ev.After, "ideal": ev.Ideal})
		}
		if oc.ProfileS != nil {
			files["corrected_profile.csv"] = profileCSV(els, oc.ProfileS)
		}
		files["compare.png"] = func(w io.Writer) error { return comparePNG(w, ev) }
	}

	if truth != nil {
		switch {
		case len(truth.Layers) == 0:
			res.TrueSpeedMPS = jsonx.Float(truth.SpeedMPS)
		case !math.IsNaN(refDepth):
			res.TrueSpeedMPS = jsonx.Float(truth.MeanSpeed(refDepth))
		}
	}
	res.Notes = dedupe(res.Notes)

	if outDir != "" && s.KeepImages {
		if err := writeOutputs(outDir, files); err != nil {
			return nil, fmt.Errorf("writing the per-acquisition outputs: %w", err)
		}
		res.Outputs = outRel
	}
	return res, nil
}

// estimateSpeed runs the speed method of s.
func estimateSpeed(a *acq.Acquisition, ch *recon.Channels, s *Settings, sweep speed.SweepConfig) (*speed.Result, *correction.SpeedCheck, *speed.TargetResult, error) {
	method := s.Method
	var autoNote string
	tcfg := speed.TargetConfig{MinMPS: s.MinMPS, MaxMPS: s.MaxMPS}
	if method == MethodAuto {
		method = MethodSweep
		if s.ByDepth {
			autoNote = "method auto: the sweep, as the speed by depth needs it"
		} else if tr, err := speed.Targets(a, ch, tcfg); err == nil && tr.Confidence == speed.High {
			r := tr.Result
			r.Notes = append([]string{fmt.Sprintf("method auto: %d bright point target(s) fit well, so their arrival-time fit is reported", len(tr.Targets))}, r.Notes...)
			return &r, nil, tr, nil
		} else {
			autoNote = "method auto: no bright point target fits well, so the focus sweep is reported"
		}
	}
	if method == MethodTargets {
		tr, err := speed.Targets(a, ch, tcfg)
		if err != nil {
			return nil, nil, nil, err
		}
		r := tr.Result
		return &r, nil, tr, nil
	}
	sr, check, err := correction.EstimateSpeed(a, ch, sweep)
	if err != nil {
		return nil, nil, nil, err
	}
	if autoNote != "" {
		sr.Notes = append([]string{autoNote}, sr.Notes...)
	}
	return sr, check, nil, nil
}

func metricOf(m map[string]float64, k string) jsonx.Float {
	if v, ok := m[k]; ok {
		return jsonx.Float(v)
	}
	return jsonx.Float(math.NaN())
}

// meanSuffix is the mean of the finite values whose key ends in suffix
// (one per region pair), NaN when there are none.
func meanSuffix(m map[string]float64, suffix string) jsonx.Float {
	s, n := 0.0, 0
	for _, k := range sortedKeys(m) {
		if v := m[k]; strings.HasSuffix(k, suffix) && finite(v) {
			s += v
			n++
		}
	}
	if n == 0 {
		return jsonx.Float(math.NaN())
	}
	return jsonx.Float(s / float64(n))
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

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

func profileCSV(els []acq.Element, p []float64) func(io.Writer) error {
	return func(w io.Writer) error {
		fmt.Fprintln(w, "element,x_m,profile_s")
		for i, v := range p {
			fmt.Fprintf(w, "%d,%g,%g\n", i, els[i].X, v)
		}
		return nil
	}
}

// comparePNG draws the evaluation's images side by side on one dB scale.
func comparePNG(w io.Writer, ev *correction.Evaluation) error {
	g := ev.Grid
	if g.Kind != recon.Rect {
		return errors.New("the evaluation grid is not rectangular")
	}
	ref := 0.0
	envs := make([][]float64, len(ev.Shots))
	for i, s := range ev.Shots {
		envs[i] = recon.Envelope(s.Image)
		for _, v := range envs[i] {
			ref = math.Max(ref, v)
		}
	}
	var imgs []report.Image
	for i, s := range ev.Shots {
		imgs = append(imgs, report.Image{XM: g.X, ZM: g.Z, DB: recon.LogCompress(envs[i], ref, 60), Title: s.Title})
	}
	return report.SideBySidePNG(w, imgs, report.BModeOptions{DynamicRangeDB: 60})
}

// writeOutputs writes the files into dir, replacing the folder atomically.
func writeOutputs(dir string, files map[string]func(io.Writer) error) error {
	d, err := atomicfile.NewDir(dir, true)
	if err != nil {
		return err
	}
	defer d.Abort()
	for _, name := range sortedKeys(files) {
		if err := atomicfile.Write(filepath.Join(d.Path(), name), true, files[name]); err != nil {
			return fmt.Errorf("%s: %w", name, err)
		}
	}
	return d.Commit()
}
