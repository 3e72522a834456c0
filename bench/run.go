package bench

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"time"

	"celerity/acq"
	"celerity/internal/atomicfile"
	"celerity/internal/jobs"
	"celerity/internal/jsonx"
	"celerity/metrics"
	"celerity/recon"
)

// EvalVersion is part of every result's key: bump it when the scoring of a
// case changes, so that stored results are redone.
const EvalVersion = "celerity.bench-eval/1"

// Names in an output folder.
const (
	ManifestName = "bench.json"
	SuiteCopy    = "suite.yaml"
	ResultsDir   = "results"
	CasesDir     = "cases"
	manifestV1   = "celerity.bench/1"
)

// Options tunes Run.
type Options struct {
	// Out is the output folder: the manifest, a copy of the suite and one
	// result record per case (results/). A folder holding a run of the same
	// suite is continued.
	Out string
	// Cache holds the generated cases; default Out/cases.
	Cache string
	// Workers is the number of cases run at once; 0 means 1. Each case's
	// built-in estimators use every CPU on their own.
	Workers int
	// Shard selects a slice of the cases (see internal/jobs).
	Shard jobs.Shard
	// Externals are run after the built-in estimators, in this order.
	Externals []*External
	// RetryFailed reruns cases whose generation failed.
	RetryFailed bool
	Progress    func(jobs.Progress)
}

// EstimatorInfo describes one estimator of a run.
type EstimatorInfo struct {
	Name     string  `json:"name"`
	Kind     string  `json:"kind"` // built-in or external
	Command  string  `json:"command,omitempty"`
	TimeoutS float64 `json:"timeout_s,omitempty"`
}

// Manifest is bench.json: what an output folder holds.
type Manifest struct {
	Format      string          `json:"format"`
	Suite       string          `json:"suite"`
	SuiteSHA256 string          `json:"suite_sha256"`
	Estimators  []EstimatorInfo `json:"estimators"`
	// Key fingerprints the estimators and the scoring; records made under
	// another key are redone.
	Key string `json:"key"`
}

// NewManifest describes a run of s with the suite's built-ins and externals.
func NewManifest(s *Suite, ext []*External) (*Manifest, error) {
	m := &Manifest{Format: manifestV1, Suite: s.Name, SuiteSHA256: s.SHA256}
	seen := map[string]bool{}
	for _, n := range s.Builtins {
		m.Estimators = append(m.Estimators, EstimatorInfo{Name: n, Kind: "built-in"})
		seen[n] = true
	}
	for _, e := range ext {
		if seen[e.Label] {
			return nil, fmt.Errorf("two estimators are named %q", e.Label)
		}
		seen[e.Label] = true
		m.Estimators = append(m.Estimators, EstimatorInfo{Name: e.Label, Kind: "external", Command: e.Command, TimeoutS: e.Timeout.Seconds()})
	}
	b, err := json.Marshal(struct {
		Version    string          `json:"version"`
		Estimators []EstimatorInfo `json:"estimators"`
	}{EvalVersion, m.Estimators})
	if err != nil {
		return nil, err
	}
	h := sha256.Sum256(b)
	m.Key = hex.EncodeToString(h[:16])
	return m, nil
}

// Names lists the estimators in order.
func (m *Manifest) Names() []string {
	var out []string
	for _, e := range m.Estimators {
		out = append(out, e.Name)
	}
	return out
}

// ReadManifest reads dir/bench.json.
func ReadManifest(dir string) (*Manifest, error) {
	path := filepath.Join(dir, ManifestName)
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var m Manifest
	if err := jsonx.DecodeStrict(b, &m); err != nil {
		return nil, fmt.Errorf("%s: not a benchmark manifest: %v", path, err)
	}
	if m.Format != manifestV1 {
		return nil, fmt.Errorf("%s: format: want %q, got %q", path, manifestV1, m.Format)
	}
	return &m, nil
}

// prepareOut checks that out is new, empty or a run of the same suite, and
// writes the manifest and the suite's copy.
func prepareOut(out string, s *Suite, m *Manifest) error {
	if st, err := os.Stat(out); err == nil {
		if !st.IsDir() {
			return fmt.Errorf("%s: exists and is not a folder", out)
		}
		old, err := ReadManifest(out)
		switch {
		case errors.Is(err, os.ErrNotExist):
			ents, _ := os.ReadDir(out)
			if len(ents) > 0 {
				return fmt.Errorf("%s: exists and is not a benchmark output folder (no %s); choose another --out", out, ManifestName)
			}
		case err != nil:
			return err
		case old.SuiteSHA256 != s.SHA256:
			return fmt.Errorf("%s: holds the results of another suite (%s, or an edited copy of it); choose another --out", out, old.Suite)
		}
	}
	if err := os.MkdirAll(filepath.Join(out, ResultsDir), 0o755); err != nil {
		return err
	}
	if err := atomicfile.WriteBytes(filepath.Join(out, SuiteCopy), true, s.Source); err != nil {
		return err
	}
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(filepath.Join(out, ManifestName), true, append(b, '\n'))
}

// Run generates the cases of the shard that are not cached, runs every
// estimator on each case that has no current result, scores them, and
// returns the results of the shard's finished cases. Case failures
// (simulation, loading) and estimator failures are results, not errors;
// the error is for problems of the run itself, or ctx's error when it was
// cancelled (the results so far are returned with it).
func Run(ctx context.Context, s *Suite, opt Options) (*Results, error) {
	if opt.Out == "" {
		return nil, errors.New("bench: no output folder")
	}
	m, err := NewManifest(s, opt.Externals)
	if err != nil {
		return nil, err
	}
	var ests []Estimator
	for _, n := range s.Builtins {
		e, err := Builtin(n)
		if err != nil {
			return nil, err
		}
		ests = append(ests, e)
	}
	for _, e := range opt.Externals {
		ests = append(ests, e)
	}
	if len(ests) == 0 {
		return nil, fmt.Errorf("%s: no estimators to run: the suite's estimators key lists none and no external estimator was given", s.File)
	}
	if err := prepareOut(opt.Out, s, m); err != nil {
		return nil, err
	}
	cache := opt.Cache
	if cache == "" {
		cache = filepath.Join(opt.Out, CasesDir)
	}
	if err := os.MkdirAll(cache, 0o755); err != nil {
		return nil, err
	}
	var js []jobs.Job
	for i := range s.Cases {
		c := &s.Cases[i]
		js = append(js, jobs.Job{ID: c.ID, Key: m.Key, Run: func(ctx context.Context) (any, error) {
			return runCase(ctx, cache, c, ests)
		}})
	}
	resDir := filepath.Join(opt.Out, ResultsDir)
	_, runErr := jobs.Run(ctx, js, jobs.Config{Dir: resDir, Workers: opt.Workers, Shard: opt.Shard,
		RetryFailed: opt.RetryFailed, Progress: opt.Progress})
	if runErr != nil && ctx.Err() == nil {
		return nil, runErr
	}
	recs, err := jobs.ReadRecords(resDir)
	if err != nil {
		return nil, err
	}
	var want []string
	for i := range s.Cases {
		if opt.Shard.Contains(s.caseRank(i)) {
			want = append(want, s.Cases[i].ID)
		}
	}
	res, err := Collect(s, m, recs, want)
	if err != nil {
		return nil, err
	}
	res.Shard = opt.Shard
	return res, runErr
}

// caseRank is the index of case i in the canonical (sorted ID) order.
func (s *Suite) caseRank(i int) int {
	if s.ranks == nil {
		ids := make([]string, len(s.Cases))
		for k := range s.Cases {
			ids[k] = s.Cases[k].ID
		}
		sort.Strings(ids)
		s.ranks = map[string]int{}
		for k, id := range ids {
			s.ranks[id] = k
		}
	}
	return s.ranks[s.Cases[i].ID]
}

// CaseResult is the stored result of one case.
type CaseResult struct {
	Case string `json:"case"`
	// TrueSpeedMPS is the speed estimates are scored against: the medium's
	// speed, or for layers the vertical time-average speed from the array
	// face down to the reference depth (see TrueSpeed).
	TrueSpeedMPS jsonx.Float `json:"true_speed_mps"`
	// ScreenRMSNS is the rms of the true screen after removing its mean, ns
	// (0 without a screen).
	ScreenRMSNS jsonx.Float `json:"screen_rms_ns"`
	// GenerateSeconds is the simulation's wall time (0 when cached).
	GenerateSeconds float64 `json:"generate_seconds"`
	// ImagingError says why no image scores could be made, if so.
	ImagingError string `json:"imaging_error,omitempty"`
	Rows         []Row  `json:"rows"`
}

// Row is one estimator on one case.
type Row struct {
	Estimator string `json:"estimator"`
	Status    string `json:"status"` // ok or failed
	Error     string `json:"error,omitempty"`
	// Seconds is the estimator's wall time on the case.
	Seconds float64 `json:"seconds"`

	SpeedMPS      jsonx.Float `json:"speed_mps"`
	SpeedErrorMPS jsonx.Float `json:"speed_error_mps"`
	CI95LoMPS     jsonx.Float `json:"ci95_lo_mps"`
	CI95HiMPS     jsonx.Float `json:"ci95_hi_mps"`
	// Covered is 1 when the interval holds the true speed, 0 when not, NaN
	// without an interval.
	Covered    jsonx.Float `json:"covered"`
	Confidence string      `json:"confidence,omitempty"`

	// Profile numbers, mean and linear trend removed from estimate and truth
	// (metrics.ProfileError).
	ProfileRMSNS     jsonx.Float `json:"profile_rms_ns"`
	ProfileErrorNS   jsonx.Float `json:"profile_error_ns"`
	ProfileErrorFrac jsonx.Float `json:"profile_error_frac"`
	ProfileCorr      jsonx.Float `json:"profile_corr"`

	// ImageSpeedMPS is the speed of the corrected image.
	ImageSpeedMPS    jsonx.Float `json:"image_speed_mps"`
	LateralBeforeMM  jsonx.Float `json:"lateral_before_mm"`
	LateralAfterMM   jsonx.Float `json:"lateral_after_mm"`
	LateralIdealMM   jsonx.Float `json:"lateral_ideal_mm"`
	LateralRecovered jsonx.Float `json:"lateral_recovered"`
	GCNRBefore       jsonx.Float `json:"gcnr_before"`
	GCNRAfter        jsonx.Float `json:"gcnr_after"`
	GCNRIdeal        jsonx.Float `json:"gcnr_ideal"`
	GCNRRecovered    jsonx.Float `json:"gcnr_recovered"`
}

// failedRow is the row of a failed run.
func failedRow(name string, err error, secs float64) Row {
	r := emptyRow(name, secs)
	r.Status, r.Error = string(jobs.Failed), err.Error()
	return r
}

// emptyRow is a successful row with every number undefined (NaN).
func emptyRow(name string, secs float64) Row {
	n := jsonx.Float(math.NaN())
	return Row{Estimator: name, Status: string(jobs.OK), Seconds: secs,
		SpeedMPS: n, SpeedErrorMPS: n, CI95LoMPS: n, CI95HiMPS: n, Covered: n,
		ProfileRMSNS: n, ProfileErrorNS: n, ProfileErrorFrac: n, ProfileCorr: n, ImageSpeedMPS: n,
		LateralBeforeMM: n, LateralAfterMM: n, LateralIdealMM: n, LateralRecovered: n,
		GCNRBefore: n, GCNRAfter: n, GCNRIdeal: n, GCNRRecovered: n}
}

// TrueSpeed is the speed a case's bulk estimates are scored against: the
// medium's speed, or for layers the vertical time-average (harmonic mean)
// speed from the array face down to the reference depth: the centre of the
// speckle region, else the mean depth of the targets.
func TrueSpeed(c *Case, t *acq.Truth) float64 {
	if len(t.Layers) == 0 {
		return t.SpeedMPS
	}
	sc := c.Scenario
	z := sc.DepthM / 2
	switch {
	case sc.Speckle != nil:
		z = (sc.Speckle.Region.Z0 + sc.Speckle.Region.Z1) / 2
	case len(sc.Targets) > 0:
		z = 0
		for _, p := range sc.Targets {
			z += p[1]
		}
		z /= float64(len(sc.Targets))
	}
	return t.MeanSpeed(z)
}

// runCase generates (or finds) case c and runs and scores every estimator.
func runCase(ctx context.Context, cache string, c *Case, ests []Estimator) (*CaseResult, error) {
	p, gen, err := EnsureCase(cache, c)
	if err != nil {
		return nil, fmt.Errorf("generating the case: %w", err)
	}
	a, err := acq.Load(p.Acquisition)
	if err != nil {
		return nil, err
	}
	truth, err := acq.LoadTruthFile(filepath.Join(p.Truth, acq.TruthName))
	if err != nil {
		return nil, err
	}
	ch, err := recon.Prepare(a)
	if err != nil {
		return nil, err
	}
	els := a.Probe.Elements()
	x := make([]float64, len(els))
	for i, e := range els {
		x[i] = e.X
	}
	trueProf := make([]float64, len(els))
	if truth.Screen != nil && len(truth.Screen.DelaysS) == len(els) {
		copy(trueProf, truth.Screen.DelaysS)
	}
	res := &CaseResult{Case: c.ID, GenerateSeconds: gen.Seconds(), TrueSpeedMPS: jsonx.Float(TrueSpeed(c, truth))}
	res.ScreenRMSNS = jsonx.Float(rmsAboutMean(trueProf) * 1e9)
	td, _, _ := metrics.Detrend(trueProf, x)
	trueRMS := metrics.RMS(td)

	in := &Input{Dir: p.Acquisition, Acq: a, Channels: ch}
	var im *imaging
	imDone := false
	for _, e := range ests {
		if e.NeedsTargets() && len(truth.TargetsM) == 0 {
			continue
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if pr, ok := e.(preparer); ok {
			_ = pr.prepare(in) // a failure shows in Estimate
		}
		t0 := time.Now()
		est, err := safeEstimate(ctx, e, in)
		secs := time.Since(t0).Seconds()
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if err != nil {
			res.Rows = append(res.Rows, failedRow(e.Name(), err, secs))
			continue
		}
		row := emptyRow(e.Name(), secs)
		row.Confidence = est.Confidence
		tc := float64(res.TrueSpeedMPS)
		if !math.IsNaN(est.SpeedMPS) {
			row.SpeedMPS = jsonx.Float(est.SpeedMPS)
			row.SpeedErrorMPS = jsonx.Float(metrics.SpeedError(est.SpeedMPS, tc))
			if lo, hi := est.CI95MPS[0], est.CI95MPS[1]; finite(lo) && finite(hi) {
				row.CI95LoMPS, row.CI95HiMPS = jsonx.Float(lo), jsonx.Float(hi)
				row.Covered = 0
				if lo <= tc && tc <= hi {
					row.Covered = 1
				}
			}
		}
		if est.ProfileS != nil {
			ed, _, _ := metrics.Detrend(est.ProfileS, x)
			row.ProfileRMSNS = jsonx.Float(metrics.RMS(ed) * 1e9)
			perr, pcorr := metrics.ProfileError(est.ProfileS, trueProf, x)
			row.ProfileErrorNS = jsonx.Float(perr * 1e9)
			if trueRMS > 0 {
				row.ProfileErrorFrac = jsonx.Float(perr / trueRMS)
				row.ProfileCorr = jsonx.Float(pcorr)
			}
		}
		imgC := a.AssumedSpeedMPS
		switch {
		case !math.IsNaN(est.SpeedMPS):
			imgC = est.SpeedMPS
		case est.WorkingSpeedMPS > 0:
			imgC = est.WorkingSpeedMPS
		}
		row.ImageSpeedMPS = jsonx.Float(imgC)
		if !imDone {
			imDone = true
			if im, err = newImaging(a, ch, truth); err != nil {
				res.ImagingError = err.Error()
				im = nil
			}
		}
		if im != nil {
			sc, err := im.score(imgC, est.ProfileS)
			if err != nil {
				res.ImagingError = err.Error()
			} else {
				row.LateralBeforeMM, row.LateralAfterMM, row.LateralIdealMM = jsonx.Float(sc.LateralBeforeMM), jsonx.Float(sc.LateralAfterMM), jsonx.Float(sc.LateralIdealMM)
				row.LateralRecovered = jsonx.Float(sc.LateralRecovered)
				row.GCNRBefore, row.GCNRAfter, row.GCNRIdeal = jsonx.Float(sc.GCNRBefore), jsonx.Float(sc.GCNRAfter), jsonx.Float(sc.GCNRIdeal)
				row.GCNRRecovered = jsonx.Float(sc.GCNRRecovered)
			}
		}
		res.Rows = append(res.Rows, row)
	}
	return res, nil
}

// safeEstimate runs e, turning a panic into an error.
func safeEstimate(ctx context.Context, e Estimator, in *Input) (est *Estimate, err error) {
	defer func() {
		if r := recover(); r != nil {
			est, err = nil, fmt.Errorf("panic: %v", r)
		}
	}()
	return e.Estimate(ctx, in)
}

func rmsAboutMean(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	m := 0.0
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	s := 0.0
	for _, x := range v {
		s += (x - m) * (x - m)
	}
	return math.Sqrt(s / float64(len(v)))
}

// InitFolder writes the manifest and the suite's copy into dir (a merged
// result's folder).
func InitFolder(dir string, s *Suite, m *Manifest) error {
	if err := os.MkdirAll(filepath.Join(dir, ResultsDir), 0o755); err != nil {
		return err
	}
	if err := atomicfile.WriteBytes(filepath.Join(dir, SuiteCopy), true, s.Source); err != nil {
		return err
	}
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(filepath.Join(dir, ManifestName), true, append(b, '\n'))
}
