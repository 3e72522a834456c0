package cohort

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"celerity/internal/atomicfile"
	"celerity/report"
)

// ReportOptions tunes WriteOutputs.
type ReportOptions struct {
	// Group and X name the metadata columns of the per-group strip plot and
	// of the plot of speed against a numeric column (see Columns).
	Group, X string
	// Caution is the caution sentence of cohort.json and report.html;
	// Footer a line at the bottom of the page (e.g. the version).
	Caution, Footer string
}

// Figure is a written plot.
type Figure struct {
	File    string // relative to the output folder
	Caption string
}

// WriteOutputs writes the files derived from the table into dir, replacing
// earlier ones: cohort.csv, timing.csv, cohort.json, the plots in plots/
// and report.html. It returns the summary.
func WriteOutputs(dir string, t *Table, opt ReportOptions) (*Summary, error) {
	group, x, err := Columns(t, opt.Group, opt.X)
	if err != nil {
		return nil, err
	}
	sum := Summarize(t, group, x, opt.Caution)
	if err := atomicfile.Write(filepath.Join(dir, "cohort.csv"), true, func(w io.Writer) error { return WriteCSV(w, t) }); err != nil {
		return nil, err
	}
	if err := atomicfile.Write(filepath.Join(dir, "timing.csv"), true, func(w io.Writer) error { return WriteTimingCSV(w, t) }); err != nil {
		return nil, err
	}
	if err := atomicfile.Write(filepath.Join(dir, "cohort.json"), true, func(w io.Writer) error { return writeJSON(w, sum) }); err != nil {
		return nil, err
	}
	figs, err := WritePlots(dir, t, group, x)
	if err != nil {
		return nil, err
	}
	page, err := Page(dir, t, sum, figs, opt)
	if err != nil {
		return nil, err
	}
	return sum, atomicfile.WriteBytes(filepath.Join(dir, "report.html"), true, page)
}

// points returns x and y as a series of isolated points (NaN between them,
// so that no line joins them).
func points(xs, ys []float64) ([]float64, []float64) {
	var px, py []float64
	for i := range xs {
		if i > 0 {
			px, py = append(px, math.NaN()), append(py, math.NaN())
		}
		px, py = append(px, xs[i]), append(py, ys[i])
	}
	return px, py
}

// bars returns vertical segments from lo to hi at each x, as one series.
func bars(xs, lo, hi []float64) ([]float64, []float64) {
	var px, py []float64
	for i := range xs {
		if !finite(lo[i]) || !finite(hi[i]) {
			continue
		}
		if len(px) > 0 {
			px, py = append(px, math.NaN()), append(py, math.NaN())
		}
		px, py = append(px, xs[i], xs[i]), append(py, lo[i], hi[i])
	}
	return px, py
}

// stacked spreads the k-th of n points of one group around x = g: points
// sit 0.08 apart, squeezed to stay within +/-0.35 (a deterministic
// jitter that keeps equal speeds apart).
func stacked(g float64, k, n int) float64 {
	if n <= 1 {
		return g
	}
	step := math.Min(0.08, 0.7/float64(n-1))
	return g + (float64(k)-float64(n-1)/2)*step
}

func (r *Row) interval() (float64, float64) {
	if r.Result == nil {
		return math.NaN(), math.NaN()
	}
	return float64(r.Result.CI95LoMPS), float64(r.Result.CI95HiMPS)
}

// WritePlots draws the cohort's plots into dir/plots: the distribution of
// the speeds (histogram), the speeds per group (a strip plot) when there
// is a group column, the speeds against the numeric column x when there is
// one, each acquisition's estimate with its 95 % interval, and the
// estimates against the true speeds when acquisitions hold one.
func WritePlots(dir string, t *Table, group, x string) ([]Figure, error) {
	pdir := filepath.Join(dir, "plots")
	if err := os.MkdirAll(pdir, 0o755); err != nil {
		return nil, err
	}
	var figs []Figure
	write := func(name, caption string, draw func(io.Writer) error) error {
		if err := atomicfile.Write(filepath.Join(pdir, name), true, draw); err != nil {
			return err
		}
		figs = append(figs, Figure{File: "plots/" + name, Caption: caption})
		return nil
	}
	if !t.Info.Settings.Has(StepSpeed) {
		return figs, nil
	}
	const speedLabel = "speed of sound (m/s)"
	v := t.speeds()
	if err := write("speed-histogram.png", fmt.Sprintf("Distribution of the speed of sound over the %d acquisitions with an estimate; the ticks beneath the bars are the individual estimates", len(v)),
		func(w io.Writer) error {
			return report.HistPNG(w, report.Hist{Title: "speed of sound over the cohort", XLabel: speedLabel, Values: v})
		}); err != nil {
		return nil, err
	}
	gk := t.Info.ColumnIndex(group)
	if gk >= 0 {
		names := t.groups(gk)
		lp := report.LinePlot{Title: "speed of sound by " + group, XLabel: group + " (numbered as in the legend)", YLabel: speedLabel,
			XSpan: [2]float64{0.5, float64(len(names)) + 0.5}}
		for gi, g := range names {
			var rows []*Row
			for i := range t.Rows {
				if r := &t.Rows[i]; groupName(r.Member.Meta[gk]) == g && finite(r.Speed()) {
					rows = append(rows, r)
				}
			}
			var xs, ys []float64
			for k, r := range rows {
				xs = append(xs, stacked(float64(gi+1), k, len(rows)))
				ys = append(ys, r.Speed())
			}
			px, py := points(xs, ys)
			lp.Series = append(lp.Series, report.Series{Name: fmt.Sprintf("%d: %s (n = %d)", gi+1, g, len(rows)), X: px, Y: py, Points: true})
		}
		if err := write("speed-by-group.png", fmt.Sprintf("Speed of sound per value of %s, one point per acquisition (points spread sideways within a group so that equal values stay visible)", group),
			func(w io.Writer) error { return report.LinePNG(w, lp) }); err != nil {
			return nil, err
		}
	}
	if xk := t.Info.ColumnIndex(x); xk >= 0 {
		lp := report.LinePlot{Title: "speed of sound against " + x, XLabel: x, YLabel: speedLabel}
		var bx, blo, bhi []float64
		series := map[string][2][]float64{}
		var order []string
		for i := range t.Rows {
			r := &t.Rows[i]
			xv, err := strconv.ParseFloat(r.Member.Meta[xk], 64)
			if err != nil || !finite(r.Speed()) {
				continue
			}
			lo, hi := r.interval()
			bx, blo, bhi = append(bx, xv), append(blo, lo), append(bhi, hi)
			g := ""
			if gk >= 0 {
				g = groupName(r.Member.Meta[gk])
			}
			if _, ok := series[g]; !ok {
				order = append(order, g)
			}
			s := series[g]
			series[g] = [2][]float64{append(s[0], xv), append(s[1], r.Speed())}
		}
		px, py := bars(bx, blo, bhi)
		lp.Series = append(lp.Series, report.Series{Name: "95 % interval", X: px, Y: py})
		for _, g := range sortedStrings(order) {
			px, py := points(series[g][0], series[g][1])
			name := "estimate"
			if gk >= 0 {
				name = group + " " + g
			}
			lp.Series = append(lp.Series, report.Series{Name: name, X: px, Y: py, Points: true})
		}
		if err := write("speed-vs-"+fileSafe(x)+".png", fmt.Sprintf("Speed of sound against %s, with each estimate's 95 %% interval", x),
			func(w io.Writer) error { return report.LinePNG(w, lp) }); err != nil {
			return nil, err
		}
	}
	// every estimate with its interval, in table order
	{
		lp := report.LinePlot{Title: "each estimate with its 95 % interval", XLabel: "acquisition (row of cohort.csv)", YLabel: speedLabel,
			XSpan: [2]float64{0.5, float64(len(t.Rows)) + 0.5}}
		var xs, lo, hi []float64
		var hx, hy, lx, ly []float64
		for i := range t.Rows {
			r := &t.Rows[i]
			if !finite(r.Speed()) {
				continue
			}
			l, h := r.interval()
			xs, lo, hi = append(xs, float64(i+1)), append(lo, l), append(hi, h)
			if r.Result.Confidence == "high" {
				hx, hy = append(hx, float64(i+1)), append(hy, r.Speed())
			} else {
				lx, ly = append(lx, float64(i+1)), append(ly, r.Speed())
			}
		}
		px, py := bars(xs, lo, hi)
		lp.Series = append(lp.Series, report.Series{Name: "95 % interval", X: px, Y: py})
		px, py = points(hx, hy)
		lp.Series = append(lp.Series, report.Series{Name: "estimate, high confidence", X: px, Y: py, Points: true})
		px, py = points(lx, ly)
		lp.Series = append(lp.Series, report.Series{Name: "estimate, low confidence", X: px, Y: py, Points: true})
		if err := write("speed-intervals.png", "The confidence of each estimate: its 95 % interval (bars) and whether the estimator reports high or low confidence, one acquisition per position in the order of cohort.csv",
			func(w io.Writer) error { return report.LinePNG(w, lp) }); err != nil {
			return nil, err
		}
	}
	if t.hasTruth() {
		lp := report.LinePlot{Title: "estimate against the true speed", XLabel: "true speed of sound (m/s)", YLabel: "estimated " + speedLabel}
		var xs, ys, lo, hi []float64
		for i := range t.Rows {
			r := &t.Rows[i]
			if r.Result == nil || !finite(r.Speed()) || !finite(float64(r.Result.TrueSpeedMPS)) {
				continue
			}
			l, h := r.interval()
			xs, ys, lo, hi = append(xs, float64(r.Result.TrueSpeedMPS)), append(ys, r.Speed()), append(lo, l), append(hi, h)
		}
		px, py := bars(xs, lo, hi)
		lp.Series = append(lp.Series, report.Series{Name: "95 % interval", X: px, Y: py})
		px, py = points(xs, ys)
		lp.Series = append(lp.Series, report.Series{Name: "estimate", X: px, Y: py, Points: true})
		if len(xs) > 0 {
			a, b := math.Min(sliceMin(xs), sliceMin(ys)), math.Max(sliceMax(xs), sliceMax(ys))
			lp.Series = append(lp.Series, report.Series{Name: "estimate = truth", X: []float64{a, b}, Y: []float64{a, b}, Dashed: true})
		}
		if err := write("speed-vs-truth.png", "Estimated against true speed for the acquisitions that hold ground truth (simulated data), with the 95 % intervals",
			func(w io.Writer) error { return report.LinePNG(w, lp) }); err != nil {
			return nil, err
		}
	}
	return figs, nil
}

func sliceMin(v []float64) float64 {
	m := math.Inf(1)
	for _, x := range v {
		m = math.Min(m, x)
	}
	return m
}

func sliceMax(v []float64) float64 {
	m := math.Inf(-1)
	for _, x := range v {
		m = math.Max(m, x)
	}
	return m
}

// fileSafe keeps letters, digits, '-', '_' and '.' of a column name.
func fileSafe(s string) string {
	var b strings.Builder
	for _, c := range s {
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', c == '-', c == '_', c == '.':
			b.WriteRune(c)
		default:
			b.WriteByte('_')
		}
	}
	return b.String()
}

func fmtSpeed(v float64) string {
	if !finite(v) {
		return ""
	}
	return fmt.Sprintf("%.1f", v)
}

func statsRow(label string, n, failed int, s Stats) []string {
	return []string{label, fmt.Sprint(n), fmt.Sprint(failed), fmt.Sprint(s.N), fmtSpeed(float64(s.MeanMPS)), fmtSpeed(float64(s.SDMPS)),
		fmtSpeed(float64(s.MedianMPS)), fmtSpeed(float64(s.Q1MPS)), fmtSpeed(float64(s.Q3MPS)), fmtSpeed(float64(s.MinMPS)), fmtSpeed(float64(s.MaxMPS))}
}

// Page builds report.html from the summary and the plots written in dir.
func Page(dir string, t *Table, sum *Summary, figs []Figure, opt ReportOptions) ([]byte, error) {
	st := &t.Info.Settings
	r := report.Report{
		Title:    fmt.Sprintf("Cohort of %d acquisitions", sum.Acquisitions),
		Subtitle: sum.Source,
		Caution:  opt.Caution,
		Footer:   strings.TrimSpace(opt.Footer + "; every acquisition is in cohort.csv and cohort.json"),
	}
	r.Summary = []report.KV{{Key: "acquisitions", Value: fmt.Sprintf("%d (%d estimated, %d failed, %d without a result)", sum.Acquisitions, sum.OK, sum.Failed, sum.Missing)}}
	if st.Has(StepSpeed) && sum.Speed.N > 0 {
		sp := sum.Speed
		r.Summary = append(r.Summary,
			report.KV{Key: "speed of sound", Value: fmt.Sprintf("mean %.1f m/s, sd %s m/s (n = %d)", float64(sp.MeanMPS), fmtSpeed(float64(sp.SDMPS)), sp.N)},
			report.KV{Key: "median (quartiles)", Value: fmt.Sprintf("%.1f m/s (%.1f to %.1f)", float64(sp.MedianMPS), float64(sp.Q1MPS), float64(sp.Q3MPS))},
			report.KV{Key: "range", Value: fmt.Sprintf("%.1f to %.1f m/s", float64(sp.MinMPS), float64(sp.MaxMPS))},
			report.KV{Key: "outliers", Value: fmt.Sprint(len(sum.Outliers))})
	}
	r.Inputs = []report.KV{{Key: "acquisitions from", Value: sum.Source}}
	if len(sum.Columns) > 0 {
		r.Inputs = append(r.Inputs, report.KV{Key: "metadata columns", Value: strings.Join(sum.Columns, ", ")})
	}
	if sum.GroupColumn != "" {
		r.Inputs = append(r.Inputs, report.KV{Key: "group column", Value: sum.GroupColumn})
	}
	if sum.XColumn != "" {
		r.Inputs = append(r.Inputs, report.KV{Key: "numeric column plotted", Value: sum.XColumn})
	}
	var steps []string
	for _, s := range st.Steps {
		steps = append(steps, string(s))
	}
	r.Settings = []report.KV{{Key: "steps", Value: strings.Join(steps, ", ")}}
	if st.Has(StepSpeed) {
		m := map[string]string{MethodSweep: "focus sweep (coherence factor) with the check for a near-field aberrator",
			MethodTargets: "arrival-time fit of point targets", MethodAuto: "the point-target fit where targets fit well, else the focus sweep"}[st.Method]
		r.Settings = append(r.Settings, report.KV{Key: "speed method", Value: m},
			report.KV{Key: "speeds searched", Value: fmt.Sprintf("%g to %g m/s", st.MinMPS, st.MaxMPS)},
			report.KV{Key: "bootstrap seed", Value: fmt.Sprint(st.Seed)})
		if st.ByDepth {
			r.Settings = append(r.Settings, report.KV{Key: "by depth", Value: fmt.Sprintf("%g mm windows, Dix inversion, layers merged where their intervals overlap", st.WindowMM)})
		}
	}
	if st.Has(StepAberration) {
		r.Settings = append(r.Settings, report.KV{Key: "aberration", Value: "beamsum estimator at the estimated speed, mean and trend removed"})
	}
	if st.Has(StepCorrect) {
		v := "speed and profile alternated (correction.Run); images before (scanner's speed) and after, F-number 1.5, Hann window; regions from each acquisition's truth"
		if st.RegionsSHA256 != "" {
			v = "speed and profile alternated (correction.Run); images before (scanner's speed) and after, F-number 1.5, Hann window; regions from the region file (SHA-256 " + st.RegionsSHA256[:16] + "...)"
		}
		r.Settings = append(r.Settings, report.KV{Key: "correction", Value: v})
	}
	r.Settings = append(r.Settings, report.KV{Key: "shard", Value: sum.Shard})

	statsHead := []string{"group", "acquisitions", "failed", "n", "mean (m/s)", "sd (m/s)", "median", "q1", "q3", "min", "max"}
	if st.Has(StepSpeed) {
		tab := report.Table{Caption: "Speed of sound over the cohort", Header: statsHead,
			Notes: []string{"n: acquisitions with an estimate; sd: sample standard deviation; quartiles by linear interpolation."}}
		tab.Rows = append(tab.Rows, statsRow("all", sum.Acquisitions, sum.Failed, sum.Speed))
		for _, g := range sum.Groups {
			tab.Rows = append(tab.Rows, statsRow(sum.GroupColumn+" = "+g.Group, g.Rows, g.Failed, g.Stats))
		}
		r.Sections = append(r.Sections, report.Section{Title: "Speed of sound", Tables: []report.Table{tab}})
	}
	ps := report.Section{Title: "Plots"}
	for _, f := range figs {
		b, err := os.ReadFile(filepath.Join(dir, filepath.FromSlash(f.File)))
		if err != nil {
			return nil, err
		}
		ps.Figures = append(ps.Figures, report.Figure{Caption: f.Caption, PNG: b})
	}
	r.Sections = append(r.Sections, ps)

	rowCells := func(row *Row) []string {
		c := []string{row.Member.ID}
		c = append(c, row.Member.Meta...)
		lo, hi := row.interval()
		conf := ""
		if row.Result != nil {
			conf = row.Result.Confidence
		}
		return append(c, fmtSpeed(row.Speed()), fmtSpeed(lo), fmtSpeed(hi), conf)
	}
	head := append(append([]string{"id"}, t.Info.Columns...), "speed (m/s)", "95 % lo", "95 % hi", "confidence")
	if st.Has(StepSpeed) {
		ot := report.Table{Caption: "Outliers (beyond Tukey's fences: 1.5 interquartile ranges outside the quartiles)", Header: append(append([]string{}, head...), "side")}
		lt := report.Table{Caption: "Estimates with low confidence (first 200)", Header: append(append([]string{}, head...), "notes")}
		for i := range t.Rows {
			row := &t.Rows[i]
			if row.Outlier != "" {
				ot.Rows = append(ot.Rows, append(rowCells(row), row.Outlier))
			}
			if row.Result != nil && row.Result.Confidence == "low" && len(lt.Rows) < 200 {
				lt.Rows = append(lt.Rows, append(rowCells(row), strings.Join(row.Result.Notes, "; ")))
			}
		}
		sec := report.Section{Title: "Outliers and low confidence", Tables: []report.Table{ot, lt}}
		if len(ot.Rows) == 0 && len(lt.Rows) == 0 {
			sec.Paragraphs = []string{"No speed lies beyond Tukey's fences, and every estimate has high confidence."}
		}
		r.Sections = append(r.Sections, sec)
	}
	ft := report.Table{Caption: "Failed acquisitions (first 200)", Header: []string{"id", "error"}}
	for i := range t.Rows {
		if row := &t.Rows[i]; row.Status != StatusOK && len(ft.Rows) < 200 {
			ft.Rows = append(ft.Rows, []string{row.Member.ID, row.Status + ": " + row.Error})
		}
	}
	if len(ft.Rows) > 0 {
		r.Sections = append(r.Sections, report.Section{Title: "Failures", Tables: []report.Table{ft}})
	}
	at := report.Table{Caption: "Acquisitions (first 1000; every one is in cohort.csv)", Header: append(append([]string{}, head...), "profile rms (ns)", "status")}
	for i := range t.Rows {
		if i >= 1000 {
			break
		}
		row := &t.Rows[i]
		prof := ""
		if row.Result != nil && finite(float64(row.Result.ProfileRMSS)) {
			prof = fmt.Sprintf("%.1f", float64(row.Result.ProfileRMSS)*1e9)
		}
		at.Rows = append(at.Rows, append(rowCells(row), prof, row.Status))
	}
	r.Sections = append(r.Sections, report.Section{Title: "Acquisitions", Tables: []report.Table{at}})
	if sum.Timing.N > 0 {
		tm := sum.Timing
		r.Sections = append(r.Sections, report.Section{Title: "Runtime", KVs: []report.KV{
			{Key: "per acquisition", Value: fmt.Sprintf("median %.1f s, mean %.1f s, longest %.1f s over %d acquisitions (wall time; the only numbers that change from run to run)", tm.MedianS, tm.MeanS, tm.MaxS, tm.N)},
			{Key: "total", Value: fmt.Sprintf("%.0f s of job time", tm.TotalS)},
		}})
	}
	var defs []report.KV
	for _, k := range sortedKeys(Definitions) {
		defs = append(defs, report.KV{Key: k, Value: Definitions[k]})
	}
	r.Sections = append(r.Sections, report.Section{Title: "Definitions", KVs: defs})
	var buf bytes.Buffer
	if err := report.HTML(&buf, r); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}
