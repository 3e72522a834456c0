package main

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"celerity/bench"
	"celerity/internal/atomicfile"
	"celerity/report"
)

// benchFigure is a written plot and its caption.
type benchFigure struct {
	file, caption string
}

// meanBy averages y over the lines sharing a rounded x, for one estimator;
// it returns the distinct x in increasing order.
func meanBy(res *bench.Results, name string, x func(*bench.Line) float64, y func(*bench.Line) float64, rms bool) (xs, ys []float64) {
	sum, n := map[float64]float64{}, map[float64]int{}
	for i := range res.Lines {
		l := &res.Lines[i]
		if l.Estimator != name || l.Status != "ok" {
			continue
		}
		xv, yv := x(l), y(l)
		if math.IsNaN(xv) || math.IsNaN(yv) {
			continue
		}
		k := math.Round(xv*100) / 100
		if rms {
			yv *= yv
		}
		sum[k] += yv
		n[k]++
	}
	for k := range sum {
		xs = append(xs, k)
	}
	sort.Float64s(xs)
	for _, k := range xs {
		v := sum[k] / float64(n[k])
		if rms {
			v = math.Sqrt(v)
		}
		ys = append(ys, v)
	}
	return xs, ys
}

// estimatorsWith lists the estimators with at least one finite value of f.
func estimatorsWith(res *bench.Results, f func(*bench.Line) float64) []string {
	var out []string
	for _, name := range res.Manifest.Names() {
		for i := range res.Lines {
			if l := &res.Lines[i]; l.Estimator == name && !math.IsNaN(f(l)) {
				out = append(out, name)
				break
			}
		}
	}
	return out
}

// writeBenchPlots draws the plots into dir and returns them in order.
func writeBenchPlots(dir string, res *bench.Results) ([]benchFigure, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	var figs []benchFigure
	write := func(name, caption string, draw func(w io.Writer) error) error {
		if err := atomicfile.Write(filepath.Join(dir, name), true, draw); err != nil {
			return err
		}
		figs = append(figs, benchFigure{filepath.Join("plots", name), caption})
		return nil
	}
	speedErr := func(l *bench.Line) float64 { return float64(l.SpeedErrorMPS) }
	profErr := func(l *bench.Line) float64 { return float64(l.ProfileErrorFrac) }
	trueC := func(l *bench.Line) float64 { return l.TrueSpeedMPS }
	screen := func(l *bench.Line) float64 { return l.ScreenRMSNS }
	speeders := estimatorsWith(res, speedErr)
	profilers := estimatorsWith(res, profErr)

	if len(speeders) > 0 {
		lp := report.LinePlot{Title: "speed error against the true speed", XLabel: "true speed of sound (m/s)", YLabel: "mean error, estimate - truth (m/s)"}
		for _, n := range speeders {
			xs, ys := meanBy(res, n, trueC, speedErr, false)
			lp.Series = append(lp.Series, report.Series{Name: n, X: xs, Y: ys, Points: true})
		}
		if err := write("speed-error-vs-true-speed.png", "Mean speed error against the true speed, per estimator (over seeds and the other grid keys)",
			func(w io.Writer) error { return report.LinePNG(w, lp) }); err != nil {
			return nil, err
		}
		lp = report.LinePlot{Title: "speed error against the screen's strength", XLabel: "rms of the true arrival-time screen (ns)", YLabel: "rms speed error (m/s)"}
		for _, n := range speeders {
			xs, ys := meanBy(res, n, screen, speedErr, true)
			lp.Series = append(lp.Series, report.Series{Name: n, X: xs, Y: ys, Points: true})
		}
		if err := write("speed-error-vs-screen.png", "Rms speed error against the rms of the near-field screen, per estimator",
			func(w io.Writer) error { return report.LinePNG(w, lp) }); err != nil {
			return nil, err
		}
	}
	if len(profilers) > 0 {
		lp := report.LinePlot{Title: "profile error against the screen's strength", XLabel: "rms of the true arrival-time screen (ns)", YLabel: "profile error / true rms"}
		for _, n := range profilers {
			xs, ys := meanBy(res, n, screen, profErr, false)
			lp.Series = append(lp.Series, report.Series{Name: n, X: xs, Y: ys, Points: true})
		}
		if err := write("profile-error-vs-screen.png", "Mean profile error (fraction of the true rms, mean and trend removed) against the rms of the screen, per estimator",
			func(w io.Writer) error { return report.LinePNG(w, lp) }); err != nil {
			return nil, err
		}
	}
	dist := func(names []string, f func(*bench.Line) float64, prefix, what, unit string) error {
		for _, n := range names {
			var v []float64
			for i := range res.Lines {
				if l := &res.Lines[i]; l.Estimator == n && !math.IsNaN(f(l)) {
					v = append(v, f(l))
				}
			}
			h := report.Hist{Title: fmt.Sprintf("%s: %s", n, what), XLabel: unit, Values: v}
			if err := write(prefix+n+".png", fmt.Sprintf("Distribution of the %s of %s over the cases", what, n),
				func(w io.Writer) error { return report.HistPNG(w, h) }); err != nil {
				return err
			}
		}
		return nil
	}
	if err := dist(speeders, speedErr, "speed-error-", "speed error", "estimate - truth (m/s)"); err != nil {
		return nil, err
	}
	if err := dist(profilers, profErr, "profile-error-", "profile error", "rms error / true rms"); err != nil {
		return nil, err
	}
	return figs, nil
}

// writeBenchHTML writes the self-contained report page.
func writeBenchHTML(path string, res *bench.Results, sum *bench.Summary, figs []benchFigure) error {
	s := res.Suite
	r := report.Report{
		Title:    "Benchmark suite " + s.Name,
		Subtitle: s.Description,
		Caution:  Caution,
		Footer:   version + "; every case and estimator is in results.csv, the scores in summary.json",
	}
	r.Summary = []report.KV{
		{Key: "cases scored", Value: fmt.Sprintf("%d of %d", sum.CasesScored, sum.Cases)},
		{Key: "estimators", Value: fmt.Sprint(len(sum.Estimators))},
	}
	if sum.CasesFailed > 0 {
		r.Summary = append(r.Summary, report.KV{Key: "cases not generated", Value: fmt.Sprint(sum.CasesFailed)})
	}
	if sum.CasesMissing > 0 {
		r.Summary = append(r.Summary, report.KV{Key: "cases without a result", Value: fmt.Sprint(sum.CasesMissing)})
	}
	r.Inputs = []report.KV{{Key: "suite", Value: s.Name}, {Key: "suite SHA-256", Value: s.SHA256[:16] + "..."}}
	for _, ax := range s.Axes {
		r.Inputs = append(r.Inputs, report.KV{Key: "grid: " + ax.Key, Value: strings.Join(ax.Labels, "; ")})
	}
	var seeds []string
	for _, v := range s.Seeds {
		seeds = append(seeds, fmt.Sprint(v))
	}
	r.Inputs = append(r.Inputs, report.KV{Key: "seeds", Value: strings.Join(seeds, ", ")})
	for _, e := range sum.Estimators {
		v := e.Kind
		if e.Command != "" {
			v = fmt.Sprintf("external: %s (time limit %g s)", e.Command, e.TimeoutS)
		}
		r.Settings = append(r.Settings, report.KV{Key: e.Name, Value: v})
	}
	r.Settings = append(r.Settings, report.KV{Key: "shard", Value: sum.Shard})

	tables := func(kind, what string, withGroup bool) []report.Table {
		var scores []bench.Score
		for _, sc := range sum.Scores {
			if sc.Kind == kind {
				scores = append(scores, sc)
			}
		}
		var out []report.Table
		for i, part := range []scorePart{speedPart, profilePart} {
			t := report.Table{Caption: []string{"Speed of sound", "Profile and corrected image"}[i] + ": " + what, Header: part.head(withGroup), Notes: scoreNotes[i : i+1]}
			t.Rows = part.rows(scores, sum.Timing, withGroup)
			if len(t.Rows) > 0 {
				out = append(out, t)
			}
		}
		return out
	}
	main := report.Section{Title: "Scores over all cases", Paragraphs: []string{
		"Errors are estimate minus truth. Failed runs count in the failure rate and nowhere else. Empty cells: the estimator gives no such number, or no case allowed it (no screen, no targets or inclusions, nothing lost to recover). The definitions are at the end of the page.",
	}}
	main.Tables = tables("all", "each estimator over every case it applies to", false)
	r.Sections = append(r.Sections, main)
	if ts := tables("grid point", "by grid point (each over its seeds)", true); len(ts) > 0 {
		r.Sections = append(r.Sections, report.Section{Title: "Scores by grid point", Tables: ts})
	}
	if ts := tables("grid value", "by value of each grid key (over the other keys and the seeds)", true); len(ts) > 0 {
		r.Sections = append(r.Sections, report.Section{Title: "Scores by grid value", Tables: ts})
	}
	ps := report.Section{Title: "Plots"}
	for _, f := range figs {
		b, err := os.ReadFile(filepath.Join(filepath.Dir(path), f.file))
		if err != nil {
			return err
		}
		ps.Figures = append(ps.Figures, report.Figure{Caption: f.caption, PNG: b})
	}
	r.Sections = append(r.Sections, ps)
	if len(sum.Timing) > 0 {
		t := report.Table{Caption: "Runtime per case (wall time; the only numbers that change from run to run)", Header: []string{"step", "cases", "mean (s)", "median (s)", "max (s)"}}
		for _, tm := range sum.Timing {
			t.Rows = append(t.Rows, []string{tm.Estimator, fmt.Sprint(tm.N), fmt.Sprintf("%.2f", tm.MeanS), fmt.Sprintf("%.2f", tm.MedianS), fmt.Sprintf("%.2f", tm.MaxS)})
		}
		r.Sections = append(r.Sections, report.Section{Title: "Runtime", Tables: []report.Table{t}})
	}
	ft := report.Table{Caption: "Failed runs (first 100)", Header: []string{"case", "group", "seed", "estimator", "error"}}
	for _, f := range sum.FailedCases {
		ft.Rows = append(ft.Rows, []string{f.Case, f.Group, fmt.Sprint(f.Seed), "(case)", f.Error})
	}
	for _, l := range res.Lines {
		if l.Status != "ok" && len(ft.Rows) < 100 {
			ft.Rows = append(ft.Rows, []string{l.Case.ID, l.Case.Group, fmt.Sprint(l.Case.Seed), l.Estimator, l.Error})
		}
	}
	if len(ft.Rows) > 0 {
		r.Sections = append(r.Sections, report.Section{Title: "Failures", Tables: []report.Table{ft}})
	}
	var defs []report.KV
	for _, k := range []string{"speed_error", "bias_mps", "rms_error_mps", "p95_abs_error_mps", "coverage", "failure_rate",
		"profile_error_frac", "profile_corr", "profile_error_ns", "lateral_recovered", "gcnr_recovered", "runtime"} {
		defs = append(defs, report.KV{Key: k, Value: bench.Definitions[k]})
	}
	r.Sections = append(r.Sections, report.Section{Title: "How the scores are defined", KVs: defs})
	var buf bytes.Buffer
	if err := report.HTML(&buf, r); err != nil {
		return err
	}
	return atomicfile.WriteBytes(path, true, buf.Bytes())
}
