package bench

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"

	"celerity/internal/jobs"
	"celerity/internal/jsonx"
)

// Line is one row of results.csv: one estimator on one case.
type Line struct {
	Case         *Case
	TrueSpeedMPS float64
	ScreenRMSNS  float64
	Row
}

// CaseFailure is a case that could not be generated or read; its
// estimators did not run.
type CaseFailure struct {
	Case  *Case
	Error string
}

// Results are the scored rows of a run or a merge.
type Results struct {
	Suite    *Suite
	Manifest *Manifest
	Shard    jobs.Shard
	// Scope is the number of cases covered (the shard's, or all).
	Scope int
	// Lines are in suite order, estimators in manifest order.
	Lines []Line
	// GenerateSeconds maps case IDs to the simulation's wall time.
	GenerateSeconds map[string]float64
	Failed          []CaseFailure
	// Missing cases have no result yet (an interrupted run, or a merge
	// without every shard).
	Missing []*Case
}

// Collect turns result records into Results for the cases whose IDs are in
// want (nil: every case of the suite). Records made under another key are
// treated as missing.
func Collect(s *Suite, m *Manifest, recs []jobs.Record, want []string) (*Results, error) {
	byID := map[string]*jobs.Record{}
	for i := range recs {
		byID[recs[i].ID] = &recs[i]
	}
	in := map[string]bool{}
	for _, id := range want {
		in[id] = true
	}
	res := &Results{Suite: s, Manifest: m, GenerateSeconds: map[string]float64{}}
	for i := range s.Cases {
		c := &s.Cases[i]
		if want != nil && !in[c.ID] {
			continue
		}
		res.Scope++
		r := byID[c.ID]
		switch {
		case r == nil || r.Key != m.Key:
			res.Missing = append(res.Missing, c)
			continue
		case r.Status == jobs.Failed:
			res.Failed = append(res.Failed, CaseFailure{Case: c, Error: r.Error})
			continue
		}
		var cr CaseResult
		if err := jsonx.DecodeStrict(r.Result, &cr); err != nil {
			return nil, fmt.Errorf("result of case %s: %v", c.ID, err)
		}
		if cr.Case != c.ID {
			return nil, fmt.Errorf("result of case %s names case %s", c.ID, cr.Case)
		}
		res.GenerateSeconds[c.ID] = cr.GenerateSeconds
		for _, row := range cr.Rows {
			res.Lines = append(res.Lines, Line{Case: c, TrueSpeedMPS: float64(cr.TrueSpeedMPS), ScreenRMSNS: float64(cr.ScreenRMSNS), Row: row})
		}
	}
	return res, nil
}

// MergeInputs reads the output folders of shard runs of one suite: their
// suite, manifest and records. The folders must hold the same suite and the
// same estimators; a case found in several keeps the first folder's record.
func MergeInputs(dirs []string) (*Suite, *Manifest, []jobs.Record, error) {
	if len(dirs) == 0 {
		return nil, nil, nil, fmt.Errorf("no folders to merge")
	}
	var s *Suite
	var m *Manifest
	seen := map[string]bool{}
	var recs []jobs.Record
	for _, d := range dirs {
		dm, err := ReadManifest(d)
		if err != nil {
			return nil, nil, nil, fmt.Errorf("%s: not a benchmark output folder: %w", d, err)
		}
		src, err := os.ReadFile(filepath.Join(d, SuiteCopy))
		if err != nil {
			return nil, nil, nil, err
		}
		ds, err := ParseSuite(filepath.Join(d, SuiteCopy), dm.Suite, src)
		if err != nil {
			return nil, nil, nil, err
		}
		if ds.SHA256 != dm.SuiteSHA256 {
			return nil, nil, nil, fmt.Errorf("%s: %s does not match the suite its manifest names", d, SuiteCopy)
		}
		if s == nil {
			s, m = ds, dm
		} else {
			if ds.SHA256 != s.SHA256 {
				return nil, nil, nil, fmt.Errorf("%s holds a run of another suite (%s) than %s (%s)", d, dm.Suite, dirs[0], m.Suite)
			}
			if dm.Key != m.Key {
				return nil, nil, nil, fmt.Errorf("%s was run with other estimators than %s (%v against %v)", d, dirs[0], dm.Names(), m.Names())
			}
		}
		rs, err := jobs.ReadRecords(filepath.Join(d, ResultsDir))
		if err != nil {
			return nil, nil, nil, err
		}
		for _, r := range rs {
			if r.Key != m.Key || seen[r.ID] {
				continue
			}
			seen[r.ID] = true
			recs = append(recs, r)
		}
	}
	sort.Slice(recs, func(a, b int) bool { return recs[a].ID < recs[b].ID })
	return s, m, recs, nil
}

// Score is the summary of one estimator over a group of cases. Counts are
// over the cases the estimator applies to (the point-target method only to
// cases with targets); errors are estimate minus truth.
type Score struct {
	Estimator string `json:"estimator"`
	// Group is "all", a grid point's label or one grid value "key=value";
	// Kind says which ("all", "grid point", "grid value").
	Group       string      `json:"group"`
	Kind        string      `json:"kind"`
	Cases       int         `json:"cases"`
	Failed      int         `json:"failed"`
	FailureRate jsonx.Float `json:"failure_rate"`

	SpeedN         int         `json:"speed_n"`
	BiasMPS        jsonx.Float `json:"bias_mps"`
	RMSErrorMPS    jsonx.Float `json:"rms_error_mps"`
	P95AbsErrorMPS jsonx.Float `json:"p95_abs_error_mps"`
	IntervalN      int         `json:"interval_n"`
	Coverage       jsonx.Float `json:"coverage"`

	ProfileN         int         `json:"profile_n"`
	ProfileErrorFrac jsonx.Float `json:"profile_error_frac"`
	ProfileCorr      jsonx.Float `json:"profile_corr"`
	// ProfileErrorNS is the mean profile error over every case with a
	// profile, screened or not.
	ProfileErrorNS jsonx.Float `json:"profile_error_ns"`

	LateralN         int         `json:"lateral_n"`
	LateralRecovered jsonx.Float `json:"lateral_recovered"`
	GCNRN            int         `json:"gcnr_n"`
	GCNRRecovered    jsonx.Float `json:"gcnr_recovered"`
}

// Timing is the runtime of one estimator per case, s. It is the one part
// of a summary that changes from run to run.
type Timing struct {
	Estimator string  `json:"estimator"`
	N         int     `json:"n"`
	MeanS     float64 `json:"mean_s"`
	MedianS   float64 `json:"median_s"`
	MaxS      float64 `json:"max_s"`
}

// FailedCase is a case that could not be run, as listed in summary.json.
type FailedCase struct {
	Case  string `json:"case"`
	Group string `json:"group"`
	Seed  uint64 `json:"seed"`
	Error string `json:"error"`
}

// Summary is summary.json.
type Summary struct {
	Format       string            `json:"format"`
	Suite        string            `json:"suite"`
	SuiteSHA256  string            `json:"suite_sha256"`
	Description  string            `json:"description,omitempty"`
	Shard        string            `json:"shard"`
	Cases        int               `json:"cases"`
	CasesScored  int               `json:"cases_scored"`
	CasesFailed  int               `json:"cases_failed"`
	CasesMissing int               `json:"cases_missing"`
	Estimators   []EstimatorInfo   `json:"estimators"`
	Scores       []Score           `json:"scores"`
	FailedCases  []FailedCase      `json:"failed_cases,omitempty"`
	Definitions  map[string]string `json:"definitions"`
	Timing       []Timing          `json:"timing"`
}

// SummaryFormat identifies summary.json.
const SummaryFormat = "celerity.bench-summary/1"

// Definitions say how each score is computed (also in docs/bench.md).
var Definitions = map[string]string{
	"speed_error":        "estimate minus the true speed (m/s); for layered media the true speed is the vertical time-average speed from the array face to the centre depth of the speckle region (else the mean target depth)",
	"bias_mps":           "mean speed error over the cases with a speed estimate",
	"rms_error_mps":      "root mean square speed error",
	"p95_abs_error_mps":  "95th percentile of the absolute speed error, nearest rank: the smallest value that at least 95 % of the absolute errors do not exceed",
	"coverage":           "share of the 95 % intervals that hold the true speed (bounds included), over the estimates that give an interval",
	"failure_rate":       "failed runs over the cases the estimator applies to; failed runs are left out of every other score",
	"profile_error_frac": "rms difference between estimated and true arrival-time profiles, both with mean and linear trend removed, divided by the rms of the detrended true profile; mean over the cases with a screen",
	"profile_corr":       "Pearson correlation of the detrended estimated and true profiles; mean over the cases with a screen",
	"profile_error_ns":   "rms profile difference (detrended) in ns; mean over every case with a profile, with or without a screen",
	"lateral_recovered":  "(W_before - W_after) / (W_before - W_ideal), W the mean -6 dB lateral width of the targets measured in all three images; before: the scanner's assumed speed, no correction; after: the estimated speed (else the speed the profile was estimated at, else the assumed speed) plus the estimated profile; ideal: the true medium and screen. Scored when W_before exceeds W_ideal by at least 5 %; mean over those cases",
	"gcnr_recovered":     "(G_after - G_before) / (G_ideal - G_before), G the mean gCNR of the inclusions against their surroundings in the same three images; scored when G_ideal - G_before >= 0.02; mean over those cases",
	"runtime":            "wall time of the estimator on one case (timing section and timing.csv; the only numbers that change between runs)",
}

// scope is a named group of lines.
type scope struct {
	name, kind string
	has        func(*Case) bool
}

func (r *Results) scopes() []scope {
	out := []scope{{"all", "all", func(*Case) bool { return true }}}
	s := r.Suite
	if len(s.Groups) > 1 {
		for g, name := range s.Groups {
			out = append(out, scope{name, "grid point", func(c *Case) bool { return c.GroupIndex == g }})
		}
	}
	if len(s.Axes) > 1 {
		for a, ax := range s.Axes {
			for _, lab := range ax.Labels {
				out = append(out, scope{ax.Key + "=" + lab, "grid value", func(c *Case) bool { return c.Values[a] == lab }})
			}
		}
	}
	return out
}

// Summarize computes the scores of every estimator over all cases, each
// grid point (when there are several) and each grid value (when there are
// several keys), and the runtimes.
func Summarize(r *Results) *Summary {
	sum := &Summary{Format: SummaryFormat, Suite: r.Suite.Name, SuiteSHA256: r.Suite.SHA256, Description: r.Suite.Description,
		Shard: r.Shard.String(), Cases: r.Scope, CasesFailed: len(r.Failed), CasesMissing: len(r.Missing),
		Estimators: r.Manifest.Estimators, Definitions: Definitions}
	sum.CasesScored = r.Scope - len(r.Failed) - len(r.Missing)
	for _, sc := range r.scopes() {
		for _, name := range r.Manifest.Names() {
			var ls []*Line
			for i := range r.Lines {
				l := &r.Lines[i]
				if l.Estimator == name && sc.has(l.Case) {
					ls = append(ls, l)
				}
			}
			if len(ls) == 0 {
				continue
			}
			s := score(ls)
			s.Estimator, s.Group, s.Kind = name, sc.name, sc.kind
			sum.Scores = append(sum.Scores, s)
		}
	}
	for _, f := range r.Failed {
		sum.FailedCases = append(sum.FailedCases, FailedCase{Case: f.Case.ID, Group: f.Case.Group, Seed: f.Case.Seed, Error: f.Error})
	}
	sum.Timing = timings(r)
	return sum
}

func score(ls []*Line) Score {
	s := Score{Cases: len(ls)}
	var errs, absErr, cov, frac, corr, pns, lat, gc []float64
	for _, l := range ls {
		if l.Status != string(jobs.OK) {
			s.Failed++
			continue
		}
		if v := float64(l.SpeedErrorMPS); finite(v) {
			errs = append(errs, v)
			absErr = append(absErr, math.Abs(v))
		}
		if v := float64(l.Covered); finite(v) {
			cov = append(cov, v)
		}
		if v := float64(l.ProfileErrorFrac); finite(v) {
			frac = append(frac, v)
		}
		if v := float64(l.ProfileCorr); finite(v) {
			corr = append(corr, v)
		}
		if v := float64(l.ProfileErrorNS); finite(v) {
			pns = append(pns, v)
		}
		if v := float64(l.LateralRecovered); finite(v) {
			lat = append(lat, v)
		}
		if v := float64(l.GCNRRecovered); finite(v) {
			gc = append(gc, v)
		}
	}
	s.FailureRate = jsonx.Float(float64(s.Failed) / float64(s.Cases))
	s.SpeedN = len(errs)
	s.BiasMPS = jsonx.Float(mean(errs))
	sq := make([]float64, len(errs))
	for i, e := range errs {
		sq[i] = e * e
	}
	s.RMSErrorMPS = jsonx.Float(math.Sqrt(mean(sq)))
	s.P95AbsErrorMPS = jsonx.Float(NearestRank(absErr, 0.95))
	s.IntervalN, s.Coverage = len(cov), jsonx.Float(mean(cov))
	s.ProfileN, s.ProfileErrorFrac, s.ProfileCorr = len(frac), jsonx.Float(mean(frac)), jsonx.Float(mean(corr))
	s.ProfileErrorNS = jsonx.Float(mean(pns))
	s.LateralN, s.LateralRecovered = len(lat), jsonx.Float(mean(lat))
	s.GCNRN, s.GCNRRecovered = len(gc), jsonx.Float(mean(gc))
	return s
}

// mean is the arithmetic mean, summed in order; NaN for no values.
func mean(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// NearestRank is the p-quantile by the nearest-rank rule: the smallest
// value v such that at least a fraction p of the values are <= v, i.e. the
// ceil(p n)-th smallest. NaN for no values.
func NearestRank(v []float64, p float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	k := int(math.Ceil(p*float64(len(s)) - 1e-9))
	return s[min(max(k, 1), len(s))-1]
}

func timings(r *Results) []Timing {
	var out []Timing
	add := func(name string, v []float64) {
		if len(v) == 0 {
			return
		}
		s := append([]float64(nil), v...)
		sort.Float64s(s)
		med := s[len(s)/2]
		if len(s)%2 == 0 {
			med = (s[len(s)/2-1] + s[len(s)/2]) / 2
		}
		out = append(out, Timing{Estimator: name, N: len(s), MeanS: mean(v), MedianS: med, MaxS: s[len(s)-1]})
	}
	var gen []float64
	for i := range r.Suite.Cases {
		if v, ok := r.GenerateSeconds[r.Suite.Cases[i].ID]; ok && v > 0 {
			gen = append(gen, v)
		}
	}
	add("(simulation)", gen)
	for _, name := range r.Manifest.Names() {
		var v []float64
		for _, l := range r.Lines {
			if l.Estimator == name {
				v = append(v, l.Seconds)
			}
		}
		add(name, v)
	}
	return out
}

// fixed formats v with d decimals; NaN and infinities give "".
func fixed(v float64, d int) string {
	if !finite(v) {
		return ""
	}
	if v == 0 {
		v = 0 // no "-0.00"
	}
	s := strconv.FormatFloat(v, 'f', d, 64)
	if z := strconv.FormatFloat(0, 'f', d, 64); s == "-"+z {
		s = z
	}
	return s
}

// ResultsHeader is the header of results.csv before the grid keys' columns
// are inserted after "group".
var resultsColumns = []string{
	"status", "true_speed_mps", "screen_rms_ns", "speed_mps", "speed_error_mps", "ci95_lo_mps", "ci95_hi_mps", "covered", "confidence",
	"profile_rms_ns", "profile_error_ns", "profile_error_frac", "profile_corr",
	"image_speed_mps", "lateral_before_mm", "lateral_after_mm", "lateral_ideal_mm", "lateral_recovered",
	"gcnr_before", "gcnr_after", "gcnr_ideal", "gcnr_recovered", "error",
}

// WriteResultsCSV writes results.csv: one row per case and estimator, with
// the case ID, its grid point, one column per grid key, the seed and the
// estimator, then the scores (empty where undefined). Speeds and errors
// have 3 decimals (m/s), times 3 (ns), widths 4 (mm), fractions 4. It holds
// no runtimes, so the same suite gives the same bytes.
func WriteResultsCSV(w io.Writer, r *Results) error {
	cw := csv.NewWriter(w)
	head := []string{"case", "group"}
	for _, ax := range r.Suite.Axes {
		head = append(head, ax.Key)
	}
	head = append(head, "seed", "estimator")
	head = append(head, resultsColumns...)
	if err := cw.Write(head); err != nil {
		return err
	}
	for _, l := range r.Lines {
		rec := []string{l.Case.ID, l.Case.Group}
		rec = append(rec, l.Case.Values...)
		rec = append(rec, strconv.FormatUint(l.Case.Seed, 10), l.Estimator, l.Status,
			fixed(l.TrueSpeedMPS, 3), fixed(l.ScreenRMSNS, 3),
			fixed(float64(l.SpeedMPS), 3), fixed(float64(l.SpeedErrorMPS), 3), fixed(float64(l.CI95LoMPS), 3), fixed(float64(l.CI95HiMPS), 3),
			fixed(float64(l.Covered), 0), l.Confidence,
			fixed(float64(l.ProfileRMSNS), 3), fixed(float64(l.ProfileErrorNS), 3), fixed(float64(l.ProfileErrorFrac), 4), fixed(float64(l.ProfileCorr), 4),
			fixed(float64(l.ImageSpeedMPS), 3), fixed(float64(l.LateralBeforeMM), 4), fixed(float64(l.LateralAfterMM), 4), fixed(float64(l.LateralIdealMM), 4), fixed(float64(l.LateralRecovered), 4),
			fixed(float64(l.GCNRBefore), 4), fixed(float64(l.GCNRAfter), 4), fixed(float64(l.GCNRIdeal), 4), fixed(float64(l.GCNRRecovered), 4),
			l.Error)
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	for _, f := range r.Failed {
		rec := []string{f.Case.ID, f.Case.Group}
		rec = append(rec, f.Case.Values...)
		rec = append(rec, strconv.FormatUint(f.Case.Seed, 10), "(case)", string(jobs.Failed))
		for range resultsColumns[1 : len(resultsColumns)-1] {
			rec = append(rec, "")
		}
		rec = append(rec, f.Error)
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteTimingCSV writes timing.csv: case, estimator ("(simulation)" for
// the generation of the case) and seconds.
func WriteTimingCSV(w io.Writer, r *Results) error {
	cw := csv.NewWriter(w)
	if err := cw.Write([]string{"case", "estimator", "seconds"}); err != nil {
		return err
	}
	done := map[string]bool{}
	for _, l := range r.Lines {
		if !done[l.Case.ID] {
			done[l.Case.ID] = true
			if g := r.GenerateSeconds[l.Case.ID]; g > 0 {
				if err := cw.Write([]string{l.Case.ID, "(simulation)", fixed(g, 3)}); err != nil {
					return err
				}
			}
		}
		if err := cw.Write([]string{l.Case.ID, l.Estimator, fixed(l.Seconds, 3)}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
