package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/alecthomas/kong"
)

// Caution is the plain statement of what celerity is and is not.
const Caution = "celerity is a research and quality-assurance tool, not a medical device, and is not for " +
	"diagnosis or treatment decisions; simulated data only approximate real tissue. Follow your " +
	"institution's rules, local regulations and the judgement of licensed practitioners."

// Globals are the flags and writers every command sees.
type Globals struct {
	Quiet  bool `help:"Do not show progress on the terminal." short:"q"`
	stdout io.Writer
	stderr io.Writer
}

// CLI is the command tree.
type CLI struct {
	Globals

	Simulate   SimulateCmd   `cmd:"" help:"Simulate an acquisition with known ground truth from a scenario file."`
	Inspect    InspectCmd    `cmd:"" help:"Describe an acquisition folder: probe, sequence, sizes, depth range, truth."`
	Image      ImageCmd      `cmd:"" help:"Form a delay-and-sum image (complex .npy and B-mode PNG) for an assumed speed or delay model."`
	Speed      SpeedCmd      `cmd:"" help:"Estimate the speed of sound with a 95 % interval: focus sweep, by depth, or point targets."`
	Water      WaterCmd      `cmd:"" help:"Print the speed of sound of pure water at a temperature."`
	Aberration AberrationCmd `cmd:"" help:"Estimate the per-element arrival-time error profile (phase aberration) across the array."`
	Correct    CorrectCmd    `cmd:"" help:"Estimate speed and profile, re-form the image and report before/after metrics (report.html)."`
	Compare    CompareCmd    `cmd:"" help:"Measure two images or acquisitions side by side with the same regions and targets."`
	Bench      BenchCmd      `cmd:"" help:"Score speed and aberration estimators (built-in and external) against ground truth on a suite of simulated cases."`
	Cohort     CohortCmd     `cmd:"" help:"Run the estimators over many acquisitions (folders or a CSV manifest with metadata) and write one table, plots and report.html."`
	Demo       DemoCmd       `cmd:"" help:"Run the main job end to end on built-in simulated data."`
}

// exitError carries an exit status through kong's Run.
type exitError struct{ code int }

func (e exitError) Error() string { return fmt.Sprintf("exit status %d", e.code) }

func newParser(cli *CLI, stdout, stderr io.Writer, exit func(int)) (*kong.Kong, error) {
	return kong.New(cli,
		kong.Name("celerity"),
		kong.Description("Speed-of-sound and aberration estimation, corrected delay-and-sum imaging and ground-truth simulation for ultrasound channel data.\n\n"+Caution),
		kong.UsageOnError(),
		kong.ConfigureHelp(kong.HelpOptions{Compact: true}),
		kong.Writers(stdout, stderr),
		kong.Exit(exit),
	)
}

// run parses args and runs the command; it returns the process exit status.
func run(args []string, stdout, stderr io.Writer) (status int) {
	cli := &CLI{}
	cli.stdout, cli.stderr = stdout, stderr
	exited := false
	parser, err := newParser(cli, stdout, stderr, func(code int) {
		exited = true
		status = code
		panic(exitPanic{})
	})
	if err != nil {
		fmt.Fprintln(stderr, "celerity:", err)
		return 2
	}
	defer func() {
		if r := recover(); r != nil {
			if _, ok := r.(exitPanic); ok && exited {
				return
			}
			panic(r)
		}
	}()
	ctx, err := parser.Parse(args)
	if err != nil {
		fmt.Fprintln(stderr, "celerity:", err)
		if pe := (*kong.ParseError)(nil); errors.As(err, &pe) && pe.Context != nil {
			fmt.Fprintln(stderr, "Run 'celerity --help' for usage.")
		}
		return 2
	}
	if err := ctx.Run(&cli.Globals); err != nil {
		var ee exitError
		if errors.As(err, &ee) {
			return ee.code
		}
		fmt.Fprintln(stderr, "celerity:", err)
		return 1
	}
	return 0
}

type exitPanic struct{}

// printJSON writes v as indented JSON to w.
func printJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// isTerminal reports whether f is a character device (a terminal).
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

func indent(s, pre string) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	for i := range lines {
		lines[i] = pre + lines[i]
	}
	return strings.Join(lines, "\n") + "\n"
}
