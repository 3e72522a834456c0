package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/signal"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"syscall"

	"celerity/cohort"
	"celerity/internal/atomicfile"
	"celerity/internal/jobs"
)

// CohortCmd runs the estimators over many acquisitions.
type CohortCmd struct {
	Run   CohortRunCmd   `cmd:"" default:"withargs" help:"Run a cohort (the default: 'celerity cohort DIR... --out OUT')."`
	Merge CohortMergeCmd `cmd:"" help:"Merge the output folders of shard runs (--shard) into one table."`
}

// Help is the long help.
func (c *CohortCmd) Help() string {
	return `Usage:
  celerity cohort DIR... --out OUT [--jobs N] [--shard I/N] [--steps speed,aberration,correct] [--json]
  celerity cohort --manifest FILE.csv --out OUT [...]
  celerity cohort merge DIR... --out OUT

'celerity cohort run --help' lists the flags of a run (run is the default command; write
'celerity cohort run merge ...' for a search folder named merge). See docs/cohort.md.

` + Caution
}

// CohortRunCmd runs a cohort.
type CohortRunCmd struct {
	Dirs        []string `arg:"" optional:"" help:"Folders to search for acquisition folders (folders holding acquisition.yaml), recursively; hidden folders and the output folder are skipped." type:"existingdir" placeholder:"DIR"`
	Manifest    string   `help:"CSV manifest instead of folders: an id column (each acquisition's folder, relative to the manifest's folder or absolute) and any metadata columns (group, temperature_c, ...)." type:"existingfile" placeholder:"FILE.csv"`
	Out         string   `help:"Output folder. A folder holding an earlier cohort run is continued: finished acquisitions are kept." required:"" placeholder:"OUT"`
	Jobs        int      `help:"Acquisitions processed at once." default:"1"`
	Shard       string   `help:"Process slice I of N (I from 1 to N): the acquisitions whose index in the sorted list of ids, modulo N, is I-1. Combine the slices with 'cohort merge'." placeholder:"I/N"`
	Steps       string   `help:"Steps per acquisition, comma-separated: speed (bulk speed of sound with its 95 % interval), aberration (arrival-time error profile at that speed), correct (speed and profile alternated, image before and after)." default:"speed,aberration"`
	Method      string   `help:"Speed method: sweep (focus sweep with the check for a near-field aberrator), auto (the point-target fit where wires fit well, else the sweep) or targets (the point-target fit)." default:"sweep" enum:"sweep,auto,targets"`
	RangeMPS    string   `help:"Speeds to search, min:max in m/s." default:"1400:1650" name:"range-mps"`
	ByDepth     bool     `help:"Also resolve the speed by depth into layers (Dix); adds layer columns." name:"by-depth"`
	WindowMM    float64  `help:"Depth window for --by-depth, mm." default:"5" name:"window-mm"`
	Seed        uint64   `help:"Seed of the sweep's bootstrap." default:"1"`
	Regions     string   `help:"Region pairs (YAML, as for correct --regions) measured in the images of the correct step, for every acquisition; default: each acquisition's truth, if any." type:"existingfile" placeholder:"FILE"`
	KeepImages  bool     `help:"Write per-acquisition outputs (criterion curve, profile, before/after images) under OUT/acquisitions." name:"keep-images"`
	Group       string   `help:"Metadata column of the per-group statistics and strip plot (default: the column named group, if any)." placeholder:"COLUMN"`
	X           string   `help:"Numeric metadata column to plot the speed against (default: the first numeric column)." name:"x" placeholder:"COLUMN"`
	RetryFailed bool     `help:"Process again the acquisitions that failed in an earlier run." name:"retry-failed"`
	JSON        bool     `name:"json" help:"Print cohort.json on stdout."`
}

// Help is the long help.
func (c *CohortRunCmd) Help() string {
	return `Runs the chosen steps on every acquisition of a cohort, found under the given folders or
listed in a CSV manifest with metadata columns, and writes one table: OUT/cohort.csv (one row per
acquisition: id, metadata, speed and 95 % interval, confidence, layer speeds with --by-depth,
profile rms, image gains, status, error), OUT/cohort.json, OUT/timing.csv (runtimes), plots in
OUT/plots and OUT/report.html.

Each acquisition's result is written as soon as it is finished. A failure (an unreadable file,
an estimator that gives up) is recorded in its row with the message, and the run goes on; the
exit status is 1 when any acquisition failed ("N of M acquisitions failed" on stderr), 0 when
none did. Running the same command again with the same --out continues an interrupted run: the
table comes out the same as an uninterrupted run's (runtimes aside, which are in timing.csv).

` + Caution
}

// Validate checks flags.
func (c *CohortRunCmd) Validate() error {
	if (len(c.Dirs) > 0) == (c.Manifest != "") {
		return fmt.Errorf("give the folders to search or --manifest, not both and not neither")
	}
	if c.Jobs < 1 || c.Jobs > 1024 {
		return fmt.Errorf("--jobs must be between 1 and 1024")
	}
	if _, err := jobs.ParseShard(c.Shard); err != nil {
		return fmt.Errorf("--shard: %v", err)
	}
	if _, err := c.settings(); err != nil {
		return err
	}
	return nil
}

// settings builds the cohort settings from the flags.
func (c *CohortRunCmd) settings() (cohort.Settings, error) {
	steps, err := cohort.ParseSteps(c.Steps)
	if err != nil {
		return cohort.Settings{}, fmt.Errorf("--steps: %v", err)
	}
	lo, hi, err := parseRange(c.RangeMPS)
	if err != nil {
		return cohort.Settings{}, fmt.Errorf("--range-mps: %v", err)
	}
	s := cohort.Settings{Steps: steps, Method: c.Method, MinMPS: lo, MaxMPS: hi, Seed: c.Seed, ByDepth: c.ByDepth,
		Regions: c.Regions, KeepImages: c.KeepImages}
	if c.ByDepth {
		s.WindowMM = c.WindowMM
		if !slices.Contains(steps, cohort.StepSpeed) {
			return s, fmt.Errorf("--by-depth needs the speed step (--steps speed,...)")
		}
		if c.Method == cohort.MethodTargets {
			return s, fmt.Errorf("--by-depth needs the sweep (--method sweep or auto)")
		}
		if !(c.WindowMM > 0 && c.WindowMM < 1000) {
			return s, fmt.Errorf("--window-mm must be positive")
		}
	}
	if c.Seed == 0 {
		return s, fmt.Errorf("--seed must be positive")
	}
	return s, nil
}

// interruptible returns a context cancelled by the first interrupt; a
// second one ends the process (the default handler is restored). The work
// in progress (bench cases, cohort acquisitions) stops at its next step,
// external estimators at once. Call the returned function when done.
func interruptible(g *Globals, what string) (context.Context, func()) {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	finished := make(chan struct{})
	var watch sync.WaitGroup
	watch.Add(1)
	go func() {
		defer watch.Done()
		select {
		case <-ctx.Done():
			stop()
			fmt.Fprintf(g.stderr, "\ninterrupted: stopping the %s in progress at their next step (interrupt again to quit at once)\n", what)
		case <-finished:
		}
	}()
	return ctx, func() {
		close(finished)
		watch.Wait()
		stop()
	}
}

// cohortProgress shows the run's progress: a bar on a terminal, a line per
// finished acquisition otherwise (for batch logs); nothing with --quiet.
func cohortProgress(g *Globals, total int) (func(jobs.Progress), func()) {
	if g.Quiet {
		return nil, func() {}
	}
	if isTerminal(g.stderr) {
		bar := g.newProgress(total, "cohort")
		return func(p jobs.Progress) {
			if bar.bar != nil {
				bar.bar.Describe("cohort: " + p.String())
			}
			bar.set(p.Done, p.Total)
		}, bar.finish
	}
	return func(p jobs.Progress) {
		if p.Last == nil {
			fmt.Fprintf(g.stderr, "cohort: %s\n", p)
			return
		}
		fmt.Fprintf(g.stderr, "cohort: %s %s (%s)\n", p.Last.ID, p.Last.Status, p)
	}, func() {}
}

// Run runs the command.
func (c *CohortRunCmd) Run(g *Globals) error {
	s, err := c.settings()
	if err != nil {
		return err
	}
	var list *cohort.List
	if c.Manifest != "" {
		list, err = cohort.ReadManifest(c.Manifest)
	} else {
		list, err = cohort.Find(c.Dirs, c.Out)
	}
	if err != nil {
		return err
	}
	// check the plots' columns before the work, not after it
	if _, _, err := cohort.Columns(&cohort.Table{Info: &cohort.RunInfo{Columns: list.Columns, Members: list.Members}}, c.Group, c.X); err != nil {
		return err
	}
	shard, _ := jobs.ParseShard(c.Shard)
	ctx, done := interruptible(g, "acquisitions")
	defer done()
	progress, finish := cohortProgress(g, len(list.Members))
	t, runErr := cohort.Run(ctx, list, s, cohort.Options{Out: c.Out, Workers: c.Jobs, Shard: shard, RetryFailed: c.RetryFailed, Progress: progress})
	finish()
	if t == nil {
		return runErr
	}
	sum, err := cohort.WriteOutputs(c.Out, t, cohort.ReportOptions{Group: c.Group, X: c.X, Caution: Caution, Footer: version})
	if err != nil {
		return err
	}
	if runErr != nil {
		if errors.Is(runErr, context.Canceled) {
			fmt.Fprintf(g.stderr, "interrupted: %d of %d acquisitions finished; run the same command again to continue\n", sum.OK+sum.Failed, sum.Acquisitions)
			return exitError{130}
		}
		return runErr
	}
	return cohortReport(g, c.JSON, c.Out, sum)
}

// cohortReport prints the summary and sets the exit status: 1 when any
// acquisition failed or has no result.
func cohortReport(g *Globals, asJSON bool, out string, sum *cohort.Summary) error {
	if asJSON {
		if err := printJSON(g.stdout, sum); err != nil {
			return err
		}
	} else {
		fmt.Fprint(g.stdout, cohortText(sum, out))
	}
	if sum.Failed > 0 {
		fmt.Fprintf(g.stderr, "celerity: %d of %d acquisitions failed (see the error column of cohort.csv)\n", sum.Failed, sum.Acquisitions)
	}
	if sum.Missing > 0 {
		fmt.Fprintf(g.stderr, "celerity: %d of %d acquisitions have no result\n", sum.Missing, sum.Acquisitions)
	}
	if sum.Failed > 0 || sum.Missing > 0 {
		return exitError{1}
	}
	return nil
}

// cohortText is the summary as text.
func cohortText(sum *cohort.Summary, out string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "cohort          %d acquisition%s: %d estimated, %d failed", sum.Acquisitions, plural(sum.Acquisitions), sum.OK, sum.Failed)
	if sum.Missing > 0 {
		fmt.Fprintf(&b, ", %d without a result", sum.Missing)
	}
	if sum.Shard != "1/1" {
		fmt.Fprintf(&b, " (shard %s)", sum.Shard)
	}
	b.WriteString("\n")
	sp := sum.Speed
	if sp.N > 0 {
		fmt.Fprintf(&b, "speed of sound  mean %.1f m/s", float64(sp.MeanMPS))
		if sp.N > 1 {
			fmt.Fprintf(&b, ", sd %.1f m/s", float64(sp.SDMPS))
		}
		fmt.Fprintf(&b, ", median %.1f m/s (quartiles %.1f to %.1f), range %.1f to %.1f\n",
			float64(sp.MedianMPS), float64(sp.Q1MPS), float64(sp.Q3MPS), float64(sp.MinMPS), float64(sp.MaxMPS))
	}
	for _, gs := range sum.Groups {
		fmt.Fprintf(&b, "  %s = %s: %d of %d estimated", sum.GroupColumn, gs.Group, gs.N, gs.Rows)
		if gs.N > 0 {
			fmt.Fprintf(&b, ", mean %.1f m/s", float64(gs.MeanMPS))
		}
		if gs.N > 1 {
			fmt.Fprintf(&b, ", sd %.1f m/s", float64(gs.SDMPS))
		}
		b.WriteString("\n")
	}
	for _, o := range sum.Outliers {
		fmt.Fprintf(&b, "outlier         %s: %.1f m/s (%s)\n", o.ID, float64(o.SpeedMPS), o.Side)
	}
	n := 0
	for _, r := range sum.Rows {
		if r.Status == cohort.StatusFailed {
			if n++; n <= 10 {
				fmt.Fprintf(&b, "failed          %s: %s\n", r.ID, r.Error)
			}
		}
	}
	if n > 10 {
		fmt.Fprintf(&b, "failed          ... and %d more (cohort.csv)\n", n-10)
	}
	fmt.Fprintf(&b, "wrote           %s (cohort.csv, cohort.json, report.html)\n", out)
	b.WriteString(Caution + "\n")
	return b.String()
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

// CohortMergeCmd merges shard outputs.
type CohortMergeCmd struct {
	Dirs  []string `arg:"" help:"Output folders of runs of one cohort with the same settings (e.g. one per --shard)." type:"existingdir" placeholder:"DIR"`
	Out   string   `help:"Output folder to create for the merged table." required:"" placeholder:"OUT"`
	Group string   `help:"Metadata column of the per-group statistics and strip plot (default: the column named group, if any)." placeholder:"COLUMN"`
	X     string   `help:"Numeric metadata column to plot the speed against (default: the first numeric column)." name:"x" placeholder:"COLUMN"`
	Force bool     `help:"Replace an existing output folder."`
	JSON  bool     `name:"json" help:"Print cohort.json on stdout."`
}

// Help is the long help.
func (c *CohortMergeCmd) Help() string {
	return `Reads the result records of the given folders (runs of the same cohort with the same settings,
typically one per --shard slice) and writes one table as if the cohort had been run unsharded: the
same cohort.csv bytes and cohort.json numbers. The merged folder holds the records (and the
per-acquisition outputs of --keep-images), so it can be merged again. Acquisitions without a result
in any folder are reported and make the exit status 1, as do failed ones.`
}

// Run runs the command.
func (c *CohortMergeCmd) Run(g *Globals) error {
	outAbs, err := filepath.Abs(c.Out)
	if err != nil {
		return err
	}
	for _, d := range c.Dirs {
		if a, _ := filepath.Abs(d); a == outAbs {
			return fmt.Errorf("--out %s is one of the folders to merge; choose a new folder", c.Out)
		}
	}
	info, recs, err := cohort.MergeInputs(c.Dirs)
	if err != nil {
		return err
	}
	d, err := atomicfile.NewDir(c.Out, c.Force)
	if err != nil {
		return err
	}
	defer d.Abort()
	if err := cohort.InitFolder(d.Path(), info, recs, c.Dirs); err != nil {
		return err
	}
	t, err := cohort.Collect(info, recs, jobs.Shard{})
	if err != nil {
		return err
	}
	sum, err := cohort.WriteOutputs(d.Path(), t, cohort.ReportOptions{Group: c.Group, X: c.X, Caution: Caution, Footer: version})
	if err != nil {
		return err
	}
	if err := d.Commit(); err != nil {
		return err
	}
	return cohortReport(g, c.JSON, c.Out, sum)
}
