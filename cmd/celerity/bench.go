package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strings"
	"time"

	"celerity/bench"
	"celerity/internal/atomicfile"
	"celerity/internal/jobs"
)

// BenchCmd scores estimators on a suite of simulated cases.
type BenchCmd struct {
	Run   BenchRunCmd   `cmd:"" default:"withargs" help:"Run a suite (the default: 'celerity bench --suite ...')."`
	Merge BenchMergeCmd `cmd:"" help:"Merge the output folders of shard runs (--shard) into one result."`
}

// BenchRunCmd runs a suite.
type BenchRunCmd struct {
	Suite       string   `help:"Suite file (YAML, format celerity.suite/1; see docs/bench.md)." type:"existingfile" required:"" placeholder:"FILE.yaml"`
	Out         string   `help:"Output folder. A folder holding a run of the same suite is continued: finished cases are kept." required:"" placeholder:"DIR"`
	Jobs        int      `help:"Cases run at once." default:"1"`
	Estimator   []string `help:"External estimator, NAME=COMMAND (repeatable). The command gets the case's acquisition folder as its last argument and must print one JSON object with speed_mps and/or profile_s." placeholder:"NAME=COMMAND" sep:"none"`
	Shard       string   `help:"Run slice I of N (I from 1 to N): the cases whose index in the sorted list of case IDs, modulo N, is I-1. Combine the slices with 'bench merge'." placeholder:"I/N"`
	Timeout     float64  `help:"Time limit of an external estimator on one case, s." default:"120"`
	Cache       string   `help:"Folder of generated cases (default OUT/cases); share it between runs and shards on one file system to simulate each case once." placeholder:"DIR"`
	RetryFailed bool     `help:"Run again the cases whose generation failed in an earlier run." name:"retry-failed"`
	JSON        bool     `name:"json" help:"Print summary.json on stdout."`
}

// Help is the long help.
func (c *BenchRunCmd) Help() string {
	return `Generates each case of the suite once (cached by the hash of its definition), runs the
built-in estimators (speed sweeps with the coherence-factor, short-lag-coherence and brightness
criteria; the point-target fit on cases with targets; the beamsum, pairs and neighbour
aberration estimators at the coherence-factor speed) and every --estimator, and scores them
against the ground truth: speed bias, rms and 95th-percentile error, interval coverage, failure
rate, profile error and correlation, lateral width and gCNR recovered by the corrected image,
runtime. An estimator sees only the case's acquisition folder; the truth is kept apart.

Writes OUT/results.csv (one row per case and estimator), OUT/summary.json, OUT/timing.csv,
plots in OUT/plots and OUT/report.html. The same suite gives the same numbers (runtimes
aside). An interrupted run continues where it stopped when run again with the same --out.

` + Caution
}

// Validate checks flags.
func (c *BenchRunCmd) Validate() error {
	if c.Jobs < 1 || c.Jobs > 1024 {
		return fmt.Errorf("--jobs must be between 1 and 1024")
	}
	if !(c.Timeout > 0 && c.Timeout <= 7*24*3600) {
		return fmt.Errorf("--timeout must be positive (seconds)")
	}
	if _, err := jobs.ParseShard(c.Shard); err != nil {
		return fmt.Errorf("--shard: %v", err)
	}
	return nil
}

// Run runs the command.
func (c *BenchRunCmd) Run(g *Globals) error {
	s, err := bench.LoadSuite(c.Suite)
	if err != nil {
		return err
	}
	shard, _ := jobs.ParseShard(c.Shard)
	timeout := time.Duration(c.Timeout * float64(time.Second))
	var ext []*bench.External
	for _, spec := range c.Estimator {
		e, err := bench.ParseExternal(spec, timeout)
		if err != nil {
			return err
		}
		ext = append(ext, e)
	}
	ctx, done := interruptible(g, "cases")
	defer done()
	bar := g.newProgress(len(s.Cases), "bench")
	opt := bench.Options{Out: c.Out, Cache: c.Cache, Workers: c.Jobs, Shard: shard, Externals: ext, RetryFailed: c.RetryFailed,
		Progress: func(p jobs.Progress) {
			if bar.bar != nil {
				bar.bar.Describe("bench: " + p.String())
			}
			bar.set(p.Done, p.Total)
		}}
	res, runErr := bench.Run(ctx, s, opt)
	bar.finish()
	if res == nil {
		return runErr
	}
	sum := bench.Summarize(res)
	if err := writeBenchOutputs(c.Out, res, sum); err != nil {
		return err
	}
	if runErr != nil {
		if errors.Is(runErr, context.Canceled) {
			fmt.Fprintf(g.stderr, "interrupted: %d of %d cases finished; run the same command again to continue\n",
				sum.CasesScored+sum.CasesFailed, sum.Cases)
			return exitError{130}
		}
		return runErr
	}
	return benchReport(g, c.JSON, c.Out, sum)
}

// benchReport prints the summary and sets the exit status: 1 when cases
// could not be generated or are missing.
func benchReport(g *Globals, asJSON bool, out string, sum *bench.Summary) error {
	if asJSON {
		if err := printJSON(g.stdout, benchSummaryJSON{sum, Caution}); err != nil {
			return err
		}
	} else {
		fmt.Fprint(g.stdout, benchText(sum, out))
	}
	if sum.CasesFailed > 0 {
		fmt.Fprintf(g.stderr, "celerity: %d of %d cases could not be generated or read (see summary.json, failed_cases)\n", sum.CasesFailed, sum.Cases)
		return exitError{1}
	}
	if sum.CasesMissing > 0 {
		fmt.Fprintf(g.stderr, "celerity: %d of %d cases have no result\n", sum.CasesMissing, sum.Cases)
		return exitError{1}
	}
	return nil
}

// BenchMergeCmd merges shard outputs.
type BenchMergeCmd struct {
	Dirs  []string `arg:"" help:"Output folders of runs of one suite with the same estimators (e.g. one per --shard)." type:"existingdir" placeholder:"DIR"`
	Out   string   `help:"Output folder to create for the merged result." required:"" placeholder:"OUT"`
	Force bool     `help:"Replace an existing output folder."`
	JSON  bool     `name:"json" help:"Print summary.json on stdout."`
}

// Help is the long help.
func (c *BenchMergeCmd) Help() string {
	return `Reads the result records of the given folders (runs of the same suite with the same
estimators, typically one per --shard slice), and writes one result as if the suite had been run
unsharded: the same results.csv rows and summary numbers. The merged folder holds the records
too, so it can be merged again. Cases without a result in any folder are reported and make the
exit status 1.`
}

// Run runs the command.
func (c *BenchMergeCmd) Run(g *Globals) error {
	outAbs, err := filepath.Abs(c.Out)
	if err != nil {
		return err
	}
	for _, d := range c.Dirs {
		if a, _ := filepath.Abs(d); a == outAbs {
			return fmt.Errorf("--out %s is one of the folders to merge; choose a new folder", c.Out)
		}
	}
	s, m, recs, err := bench.MergeInputs(c.Dirs)
	if err != nil {
		return err
	}
	d, err := atomicfile.NewDir(c.Out, c.Force)
	if err != nil {
		return err
	}
	defer d.Abort()
	if err := bench.InitFolder(d.Path(), s, m); err != nil {
		return err
	}
	for _, r := range recs {
		if err := jobs.WriteRecord(filepath.Join(d.Path(), bench.ResultsDir), r); err != nil {
			return err
		}
	}
	res, err := bench.Collect(s, m, recs, nil)
	if err != nil {
		return err
	}
	sum := bench.Summarize(res)
	if err := writeBenchOutputs(d.Path(), res, sum); err != nil {
		return err
	}
	if err := d.Commit(); err != nil {
		return err
	}
	return benchReport(g, c.JSON, c.Out, sum)
}

// benchSummaryJSON is summary.json: the summary and the caution.
type benchSummaryJSON struct {
	*bench.Summary
	Caution string `json:"caution"`
}

// writeBenchOutputs writes results.csv, timing.csv, summary.json, the
// plots and report.html into dir (replacing earlier ones: they are derived
// from the records).
func writeBenchOutputs(dir string, res *bench.Results, sum *bench.Summary) error {
	if err := atomicfile.Write(filepath.Join(dir, "results.csv"), true, func(w io.Writer) error { return bench.WriteResultsCSV(w, res) }); err != nil {
		return err
	}
	if err := atomicfile.Write(filepath.Join(dir, "timing.csv"), true, func(w io.Writer) error { return bench.WriteTimingCSV(w, res) }); err != nil {
		return err
	}
	if err := atomicfile.Write(filepath.Join(dir, "summary.json"), true, func(w io.Writer) error {
		return printJSON(w, benchSummaryJSON{sum, Caution})
	}); err != nil {
		return err
	}
	figs, err := writeBenchPlots(filepath.Join(dir, "plots"), res)
	if err != nil {
		return err
	}
	return writeBenchHTML(filepath.Join(dir, "report.html"), res, sum, figs)
}

// benchText is the overall score table as text.
func benchText(sum *bench.Summary, out string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "suite %s: %d cases scored", sum.Suite, sum.CasesScored)
	if sum.Shard != "1/1" {
		fmt.Fprintf(&b, " (shard %s)", sum.Shard)
	}
	if sum.CasesFailed > 0 {
		fmt.Fprintf(&b, ", %d could not be generated", sum.CasesFailed)
	}
	if sum.CasesMissing > 0 {
		fmt.Fprintf(&b, ", %d without a result", sum.CasesMissing)
	}
	b.WriteString("\n")
	var all []bench.Score
	for _, sc := range sum.Scores {
		if sc.Kind == "all" {
			all = append(all, sc)
		}
	}
	for _, part := range []scorePart{speedPart, profilePart} {
		if rows := part.rows(all, sum.Timing, false); len(rows) > 0 {
			b.WriteString("\n" + textTable(append([][]string{part.header}, rows...)))
		}
	}
	b.WriteString("\n")
	fmt.Fprintf(&b, "wrote %s (results.csv, summary.json, report.html)\n", out)
	b.WriteString(Caution + "\n")
	return b.String()
}

// scorePart is a set of score columns shown as one table.
type scorePart struct {
	header []string
	// has selects the scores shown
	has   func(bench.Score) bool
	cells func(bench.Score, []bench.Timing) []string
	// overallLast marks a last column (the runtime) shown only in tables
	// over all cases.
	overallLast bool
}

// cell formats v, or "" when it is undefined.
func cell(v float64, format string) string {
	if v != v {
		return ""
	}
	return fmt.Sprintf(format, v)
}

func medianRuntime(name string, timing []bench.Timing) string {
	for _, t := range timing {
		if t.Estimator == name {
			return fmt.Sprintf("%.2f", t.MedianS)
		}
	}
	return ""
}

// scoreNotes explain the columns of the score tables.
var scoreNotes = []string{
	"failed: failure rate; bias, rms: mean and root mean square of estimate minus truth; p95: 95th percentile of the absolute error; coverage: share of 95 % intervals holding the truth; runtime: median wall time per case.",
	"profile err/rms: rms profile error over the true rms (mean and trend removed); profile corr: correlation with the true profile; profile err ns: rms profile error; lateral rec., gCNR rec.: share of the lateral width and gCNR lost before correction that the corrected image recovers (1 = ideal).",
}

var (
	speedPart = scorePart{
		header: []string{"estimator", "cases", "failed", "bias m/s", "rms m/s", "p95 m/s", "coverage", "runtime s"},
		has:    func(s bench.Score) bool { return s.SpeedN > 0 || s.Failed == s.Cases },
		cells: func(s bench.Score, t []bench.Timing) []string {
			return []string{s.Estimator, fmt.Sprint(s.Cases), fmt.Sprintf("%.0f %%", 100*float64(s.FailureRate)),
				cell(float64(s.BiasMPS), "%.2f"), cell(float64(s.RMSErrorMPS), "%.2f"), cell(float64(s.P95AbsErrorMPS), "%.2f"),
				cell(float64(s.Coverage), "%.2f"), medianRuntime(s.Estimator, t)}
		},
		overallLast: true,
	}
	profilePart = scorePart{
		header: []string{"estimator", "cases", "failed", "profile err/rms", "profile corr", "profile err ns", "lateral rec.", "gCNR rec."},
		has: func(s bench.Score) bool {
			return s.ProfileN > 0 || s.LateralN > 0 || s.GCNRN > 0 || float64(s.ProfileErrorNS) == float64(s.ProfileErrorNS)
		},
		cells: func(s bench.Score, _ []bench.Timing) []string {
			return []string{s.Estimator, fmt.Sprint(s.Cases), fmt.Sprintf("%.0f %%", 100*float64(s.FailureRate)),
				cell(float64(s.ProfileErrorFrac), "%.2f"), cell(float64(s.ProfileCorr), "%.2f"), cell(float64(s.ProfileErrorNS), "%.1f"),
				cell(float64(s.LateralRecovered), "%.2f"), cell(float64(s.GCNRRecovered), "%.2f")}
		},
	}
)

// head is the header of the part's table; withGroup puts the group first.
func (p scorePart) head(withGroup bool) []string {
	if !withGroup {
		return p.header
	}
	h := p.header
	if p.overallLast {
		h = h[:len(h)-1]
	}
	return append([]string{"group"}, h...)
}

// rows formats the scores the part shows; withGroup puts the group first.
func (p scorePart) rows(scores []bench.Score, timing []bench.Timing, withGroup bool) [][]string {
	var out [][]string
	for _, s := range scores {
		if !p.has(s) {
			continue
		}
		r := p.cells(s, timing)
		if withGroup {
			if p.overallLast {
				r = r[:len(r)-1]
			}
			r = append([]string{s.Group}, r...)
		}
		out = append(out, r)
	}
	return out
}

// textTable aligns rows in columns.
func textTable(rows [][]string) string {
	w := make([]int, len(rows[0]))
	for _, r := range rows {
		for i, c := range r {
			w[i] = max(w[i], len(c))
		}
	}
	var b strings.Builder
	for _, r := range rows {
		for i, c := range r {
			if i == 0 {
				fmt.Fprintf(&b, "%-*s", w[i], c)
			} else {
				fmt.Fprintf(&b, "  %*s", w[i], c)
			}
		}
		b.WriteString("\n")
	}
	return b.String()
}

// Help is the long help.
func (c *BenchCmd) Help() string {
	return `Usage:
  celerity bench --suite FILE --out DIR [--jobs N] [--estimator NAME=COMMAND ...] [--shard I/N] [--timeout S] [--json]
  celerity bench merge DIR... --out DIR

'celerity bench run --help' lists the flags of a run (run is the default command). Suite files
and the external estimator protocol are described in docs/bench.md.

` + Caution
}
